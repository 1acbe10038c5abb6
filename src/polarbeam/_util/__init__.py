"""Helpers shared by every stage: atomic files, CSV tables, optional dependencies, text.

Nothing here knows any physics; every stage may import it, and it imports only the core modules
(:mod:`polarbeam.errors`, :mod:`polarbeam.constants`).
"""
