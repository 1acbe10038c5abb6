"""The package version (one place; read by results, batch hashes and the build)."""

__version__ = "0.1.0"
