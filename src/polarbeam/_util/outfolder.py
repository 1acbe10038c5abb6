"""A results folder owned by one run at a time: the manifest of polarbeam's files and the lock.

polarbeam owns only what it wrote.  Every file written through :mod:`polarbeam._util.atomic`
inside an open :func:`output_folder` is listed in ``.polarbeam-manifest.json`` *before* it is
written, so even a run killed half-way leaves a manifest that names all its files.  When a run
replaces outputs it removes only files listed in the previous manifest — never the user's own
files (figures, records or notes of their own in the same folder) — and at its end it removes the
previous run's files that it did not write again (a ``comparison.csv`` of another campaign does
not stay behind).

One run at a time: ``.polarbeam.lock`` is locked with ``fcntl.flock`` (POSIX) for the whole run
and holds the run's pid.  A second run into the same folder gets :class:`FolderInUseError` (one
line naming the folder and the holder's pid); the lock of a run that died is released by the
system, so the next run takes it over.  Temporaries of a killed run (``.<name>.<random>.tmp``, the
atomic writer's names) are removed when the next run opens the folder.
"""

from __future__ import annotations

import json
import os
import re
import threading
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

from polarbeam._util.atomic import add_write_listener, write_text_atomic
from polarbeam.errors import FolderInUseError

try:  # POSIX; elsewhere the folder is not locked
    import fcntl
except ImportError:  # pragma: no cover - depends on the platform
    fcntl = None

__all__ = [
    "LOCK_FILE",
    "MANIFEST_FILE",
    "OutputFolder",
    "held_folder",
    "is_stale_temporary",
    "output_folder",
    "written_files",
]

MANIFEST_FILE = ".polarbeam-manifest.json"
LOCK_FILE = ".polarbeam.lock"
MANIFEST_FORMAT = "polarbeam-manifest/1"

#: The atomic writer's temporaries: ``tempfile.mkstemp(prefix=".<name>.", suffix=".tmp")``.
_TEMPORARY = re.compile(r"^\..+\.[A-Za-z0-9_]{8}\.tmp$")
_OWN = (MANIFEST_FILE, LOCK_FILE)

_guard = threading.RLock()
_HELD: dict[Path, OutputFolder] = {}  # open folders of this process, by resolved path


def is_stale_temporary(name: str) -> bool:
    """True for a file name the atomic writer uses for its temporaries."""
    return bool(_TEMPORARY.match(name))


def _read_manifest(root: Path) -> set[str]:
    try:
        doc = json.loads((root / MANIFEST_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return set()
    files = doc.get("files") if isinstance(doc, dict) else None
    if not isinstance(files, list):
        return set()
    return {f for f in files if isinstance(f, str) and _safe_relative(f)}


_FIRST = ("series.csv", "properties.csv", "results.json", "report.md", "report.html")


def written_files(root: str | Path) -> list[str]:
    """The files polarbeam wrote at the top of a results folder (from its manifest, those that
    exist), the main tables first; sub-folders such as ``figures/`` and the run's own state
    files (``*-state.json``) are not listed."""
    root = Path(root)
    top = sorted(
        f
        for f in _read_manifest(root)
        if "/" not in f and not f.endswith("-state.json") and (root / f).is_file()
    )
    return [f for f in _FIRST if f in top] + [f for f in top if f not in _FIRST]


def _safe_relative(rel: str) -> bool:
    """A manifest entry names a file inside the folder (never ``..``, never absolute)."""
    p = Path(rel)
    return bool(rel) and not p.is_absolute() and ".." not in p.parts and p.name not in _OWN


class OutputFolder:
    """One run's hold on a results folder; made by :func:`output_folder`."""

    def __init__(self, root: Path, *, resume: bool):
        self.root = root
        self.resume = resume
        self.previous: set[str] = set()  # files of the previous run, not yet replaced or removed
        self.listed: set[str] = set()  # what the manifest on disk lists
        self.written: set[str] = set()  # what this run wrote or kept
        self._fh = None
        self._cleared = False
        self.created = False  # the run made the folder (removed again if it writes nothing)

    # -- the lock ------------------------------------------------------------------------------
    def _lock(self) -> None:
        self.created = not self.root.exists()  # a run that writes nothing leaves no folder
        self.root.mkdir(parents=True, exist_ok=True)
        if fcntl is None:  # pragma: no cover - depends on the platform
            return
        fh = open(self.root / LOCK_FILE, "a+", encoding="utf-8")  # held for the run
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            fh.seek(0)
            holder = fh.read().strip()
            fh.close()
            pid = f"pid {holder}" if holder.isdigit() else "pid unknown"
            raise FolderInUseError(
                f"{self.root}: results folder in use by another polarbeam run ({pid}); wait for "
                "it to finish or choose another --out"
            ) from None
        fh.seek(0)
        fh.truncate()
        fh.write(f"{os.getpid()}\n")
        fh.flush()
        self._fh = fh

    def _unlock(self) -> None:
        if self._fh is not None:
            self._fh.close()  # closing the file releases the lock
            self._fh = None

    # -- the manifest --------------------------------------------------------------------------
    def _write_manifest(self, complete: bool) -> None:
        doc = {"format": MANIFEST_FORMAT, "complete": complete, "files": sorted(self.listed)}
        write_text_atomic(self.root / MANIFEST_FILE, json.dumps(doc, indent=1) + "\n")

    def _remove(self, rels: Iterable[str]) -> None:
        for rel in sorted(rels):
            p = self.root / rel
            try:
                if not p.parent.resolve().is_relative_to(self.root):
                    continue  # a folder on the way is a link out of the results folder
                if p.is_symlink() or p.is_file():
                    p.unlink()
            except OSError:
                continue
            self.listed.discard(rel)
            self.previous.discard(rel)

    def _clean_temporaries(self) -> None:
        # the folder and its subfolders (compounds/, figures/), but not a subfolder that is a
        # results folder of its own (a campaign of a batch: its own run cleans it)
        subs = (p for p in self.root.iterdir() if p.is_dir() and not p.is_symlink())
        dirs = [self.root, *sorted(p for p in subs if not (p / LOCK_FILE).exists())]
        for d in dirs:
            for p in d.iterdir():
                if is_stale_temporary(p.name) and p.is_file() and not p.is_symlink():
                    p.unlink(missing_ok=True)

    def relative(self, path: Path) -> str | None:
        """``path`` relative to the folder (POSIX form), or None when it lies outside."""
        try:
            rel = Path(path).resolve().relative_to(self.root)
        except ValueError:
            return None
        return rel.as_posix()

    def note(self, path: Path) -> None:
        """Record ``path`` as polarbeam's before it is written (the atomic writer calls this)."""
        rel = self.relative(path)
        if rel is None or rel == "." or Path(rel).name in _OWN:  # a manifest is no output
            return
        if not self.resume and not self._cleared:
            # a fresh run: the previous run's files go before the first new one is written, so
            # a run stopped half-way never leaves a mix of two campaigns
            self._cleared = True
            self._remove(self.previous - {rel})
        self.written.add(rel)
        self.previous.discard(rel)
        if rel not in self.listed:
            self.listed.add(rel)
            self._write_manifest(complete=False)

    def keep(self, paths: Iterable[Path]) -> None:
        """Files of the previous run that this run keeps as its own (reused ``--resume`` work)."""
        for path in paths:
            rel = self.relative(path)
            if rel is not None and rel in self.listed:
                self.written.add(rel)
                self.previous.discard(rel)

    def expect(self, paths: Iterable[Path]) -> None:
        """List files this run is about to write, with one manifest update (many records)."""
        new = {r for r in map(self.relative, paths) if r is not None and Path(r).name not in _OWN}
        if new - self.listed:
            self.listed |= new
            self._write_manifest(complete=False)

    def acquire(self) -> None:
        """Lock the folder, remove stale temporaries and read the previous manifest."""
        self._lock()
        try:
            self._clean_temporaries()
            self.previous = _read_manifest(self.root)
            self.listed = set(self.previous)
        except BaseException:
            self._unlock()
            raise

    def release(self, ok: bool) -> None:
        """Finish the manifest (removing the previous run's leftovers when ``ok``); unlock."""
        try:
            if ok:
                self._remove(self.previous - self.written)  # the previous run's leftovers
                self.listed = {r for r in self.listed if r in self.written or r in self.previous}
                self._write_manifest(complete=True)
            elif self.listed != self.previous or self.written:
                self._write_manifest(complete=False)
            elif self.created:  # stopped before writing: leave nothing behind
                (self.root / LOCK_FILE).unlink(missing_ok=True)
                self._unlock()
                try:
                    self.root.rmdir()
                except OSError:  # not empty (another process wrote there): keep it
                    pass
        finally:
            self._unlock()


def _note_written(path: Path) -> None:
    with _guard:
        if not _HELD:
            return
        p = Path(path).resolve()
        # the innermost open folder holding the file owns it
        for root in sorted(_HELD, key=lambda r: len(r.parts), reverse=True):
            if p == root or root in p.parents:
                _HELD[root].note(p)
                return


add_write_listener(_note_written)


def held_folder(out: str | Path) -> OutputFolder | None:
    """The hold this process has on the results folder ``out``, or None."""
    with _guard:
        return _HELD.get(Path(out).resolve())


@contextmanager
def output_folder(out: str | Path, *, resume: bool = False) -> Iterator[OutputFolder]:
    """Hold the results folder ``out`` for one run: lock it, record every file written there in
    its manifest, and remove the previous run's files that this run does not write again.

    ``resume=True`` keeps the previous run's files until the end (the run may reuse them, see
    :meth:`OutputFolder.keep`); otherwise they are removed before the first new file is written.
    Opening a folder this process already holds joins the open hold.

    Raises
    ------
    FolderInUseError
        When another run holds the folder.
    """
    root = Path(out).resolve()
    with _guard:
        held = _HELD.get(root)
        if held is None:
            held = OutputFolder(root, resume=resume)
            held.acquire()
            _HELD[root] = held
            owner = True
        else:
            owner = False
    if not owner:
        yield held
        return
    ok = False
    try:
        yield held
        ok = True
    finally:
        with _guard:
            _HELD.pop(root, None)
            held.release(ok)
