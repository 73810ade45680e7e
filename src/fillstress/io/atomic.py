"""Atomic file writes and the results-folder transaction.

A reader never sees half a file or half a results folder: each file is written under a
temporary name in its own folder and renamed into place (``os.replace`` is atomic within
one file system), and a run's folder is assembled as a hidden sibling and renamed into
place only once every file in it is complete.
"""
from __future__ import annotations

import contextlib
import json
import os
import shutil
import uuid
import warnings
from pathlib import Path, PurePosixPath
from typing import Callable

from ..errors import FillstressWarning, InputError

try:                                   # a lock tells a live run's folder from a stranded one
    import fcntl
except ImportError:                    # pragma: no cover - not on Windows: never reclaimed
    fcntl = None

EXISTS_MESSAGE = "results folder exists; pass --overwrite or choose another"
NOT_RESULTS_MESSAGE = ("is not a fillstress results folder (no manifest.json naming fillstress); "
                       "--overwrite replaces only results folders, choose another name")
LOCK_NAME = ".lock"


def _fsync_file(path: Path) -> None:
    with open(path, "rb") as fh:
        os.fsync(fh.fileno())


def _fsync_dir(path: Path) -> None:
    """Make a rename durable; not every platform lets a folder be opened, so best effort."""
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def temporary_sibling(path: Path, tag: str = "tmp") -> Path:
    """A hidden name beside `path` that keeps its full name as the ending, so writers that
    pick a format from the extension (GDAL, VTK) still see ``.tif``, ``.vtp``…"""
    return path.with_name(f".{tag}-{uuid.uuid4().hex[:12]}-{path.name}")


def write_atomic(path, writer_fn: Callable[[Path], object]) -> Path:
    """Write a file through ``writer_fn(temporary_path)`` and rename it to `path`.

    The temporary file sits in the same folder (so the rename is atomic) and is removed if
    `writer_fn` raises; an existing `path` is replaced only by a complete file.

    Parameters
    ----------
    path : str or path-like
        Final file name; its folder must exist.
    writer_fn : callable
        Called with the temporary :class:`~pathlib.Path`; must create that file.

    Returns
    -------
    pathlib.Path
        `path`.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "note.txt"
    >>> _ = write_atomic(target, lambda p: p.write_text("done"))
    >>> target.read_text(), [f.name for f in target.parent.iterdir()]
    ('done', ['note.txt'])
    """
    path = Path(os.fspath(path))
    if not path.parent.is_dir():
        raise InputError("folder does not exist", file=path.parent)
    tmp = temporary_sibling(path)
    try:
        writer_fn(tmp)
        if not tmp.is_file():
            raise RuntimeError(f"writer for {path.name} did not create its file")
        _fsync_file(tmp)
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    _fsync_dir(path.parent)
    return path


def is_results_folder(path) -> bool:
    """True when `path` is a folder whose ``manifest.json`` says fillstress wrote it.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> is_results_folder(d)
    False
    >>> _ = (d / "manifest.json").write_text('{"program": "fillstress"}')
    >>> is_results_folder(d)
    True
    """
    manifest = Path(os.fspath(path)) / "manifest.json"
    if not manifest.is_file() or manifest.is_symlink():
        return False
    try:
        return json.loads(manifest.read_text(encoding="utf-8")).get("program") == "fillstress"
    except (OSError, ValueError, AttributeError):
        return False


def _within(path: Path, folder: Path) -> bool:
    return path == folder or folder in path.parents


class ResultsWriter:
    """Build a results folder as a hidden sibling and rename it into place when complete.

    Use as a context manager. On a clean exit the folder is committed; on any exception
    the partial folder is deleted and an earlier folder of the same name is untouched.
    A run killed at any moment (SIGKILL included) leaves either the earlier folder or a
    hidden ``.<name>.partial-*`` / ``.<name>.old-*`` beside it; the next ResultsWriter of
    that name puts the earlier folder back, removes the unfinished one and says so (a
    :class:`~fillstress.errors.FillstressWarning`, also kept in ``recovered``).

    Parameters
    ----------
    path : str or path-like
        Final folder. Its parent is created if missing.
    overwrite : bool
        Replace an existing folder of that name. Without it an existing folder is refused
        at construction, before any work is done. With it the old folder must be a
        fillstress results folder (or empty); it is moved aside only after the new one is
        complete, then deleted.
    protect : iterable of path-like
        Files the run reads (the site file, its inputs): a target that is, holds or is
        one of them is refused, as is the current folder or one above it.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> with ResultsWriter(root / "run1") as out:
    ...     _ = out.path("slices/a.txt").write_text("1")
    >>> sorted(p.relative_to(root).as_posix() for p in root.rglob("*"))
    ['run1', 'run1/slices', 'run1/slices/a.txt']
    >>> ResultsWriter(root / "run1")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: .../run1: results folder exists; pass --overwrite or choose another
    >>> ResultsWriter(root / "run1", overwrite=True)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: .../run1: is not a fillstress results folder ...
    """

    def __init__(self, path, *, overwrite: bool = False, protect=()):
        self.final = Path(os.fspath(path)).absolute()
        self.overwrite = bool(overwrite)
        self.protect = [Path(os.path.realpath(p)) for p in protect]
        self._token = uuid.uuid4().hex[:12]
        self.root = self.final.with_name(f".{self.final.name}.partial-{self._token}")
        self._lock = None
        self.digests = {}     # SHA-256 of files already checksummed (io.manifest)
        self.recovered = recover_stranded(self.final)
        self._check_target()
        self._open = False

    def _check_target(self) -> None:
        real = Path(os.path.realpath(self.final))
        for p in self.protect:
            if _within(p, real):
                raise InputError(f"holds {p.name}, which this run reads; choose another "
                                 "results folder", file=self.final)
        if _within(Path(os.path.realpath(os.getcwd())), real):
            raise InputError("is the current folder or holds it; choose another results "
                             "folder", file=self.final)
        _writable_parent(self.final)
        if not (self.final.exists() or self.final.is_symlink()):
            return
        if self.final.is_symlink() or not self.final.is_dir():
            raise InputError("exists and is not a folder; choose another results name",
                             file=self.final)
        if not self.overwrite:
            raise InputError(EXISTS_MESSAGE, file=self.final)
        if not is_results_folder(self.final) and any(self.final.iterdir()):
            raise InputError(NOT_RESULTS_MESSAGE, file=self.final)

    def __enter__(self) -> "ResultsWriter":
        try:
            self.final.parent.mkdir(parents=True, exist_ok=True)
            self.root.mkdir()
        except OSError as exc:          # read-only or full disk, no permission
            raise InputError(f"cannot create the results folder here "
                             f"({exc.strerror or exc})", file=self.final.parent) from None
        self._lock = _hold_lock(self.root / LOCK_NAME)
        self._open = True
        return self

    def path(self, relative) -> Path:
        """The path of `relative` (POSIX-style, e.g. ``"vtk/pipes.vtp"``) inside the folder
        being built; sub-folders are created. Write through :func:`write_atomic`."""
        if not self._open:
            raise RuntimeError("ResultsWriter.path() is only valid inside the with-block")
        rel = PurePosixPath(str(relative).replace(os.sep, "/"))
        if rel.is_absolute() or not rel.parts or ".." in rel.parts:
            raise InputError(f"must be a relative path inside the results folder, got "
                             f"{str(relative)!r}", argument="relative")
        target = self.root.joinpath(*rel.parts)
        target.parent.mkdir(parents=True, exist_ok=True)
        return target

    def files(self) -> list[str]:
        """Relative POSIX paths of every file written so far, sorted (hidden ones left out)."""
        rels = (p.relative_to(self.root) for p in self.root.rglob("*") if p.is_file())
        return sorted(r.as_posix() for r in rels if not any(s.startswith(".") for s in r.parts))

    def __exit__(self, exc_type, exc, tb) -> bool:
        self._open = False
        try:
            if exc_type is not None:
                shutil.rmtree(self.root, ignore_errors=True)
                return False
            try:
                self._commit()
            except BaseException:
                shutil.rmtree(self.root, ignore_errors=True)
                raise
        finally:
            _release_lock(self._lock)
            (self.final / LOCK_NAME).unlink(missing_ok=True)
        return False

    def _commit(self) -> None:
        self._check_target()  # another run may have created it meanwhile
        if not self.final.exists():
            os.rename(self.root, self.final)
            _fsync_dir(self.final.parent)
            return
        backup = self.final.with_name(f".{self.final.name}.old-{self._token}")
        os.rename(self.final, backup)
        try:
            _between_renames()
            os.rename(self.root, self.final)
        except BaseException:
            os.rename(backup, self.final)  # put the earlier results back
            raise
        _fsync_dir(self.final.parent)
        shutil.rmtree(backup, ignore_errors=True)


def _writable_parent(final: Path) -> None:
    """Refuse, before any work, a results folder that cannot be created where it is asked."""
    parent = final.parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    probe = parent / f".fillstress-probe-{uuid.uuid4().hex[:12]}"
    try:                                # a real write: root, read-only mounts, quotas
        probe.mkdir()
        probe.rmdir()
    except OSError as exc:
        raise InputError(f"cannot create the results folder here "
                         f"({exc.strerror or exc})", file=parent) from None


def _between_renames() -> None:
    """Nothing; the tests replace it to kill a commit between its two renames."""


_LOCKS_HELD: set = set()                # lock files of this process's open ResultsWriters


def _hold_lock(path: Path):
    fh = open(path, "w")
    if fcntl is not None:
        fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
    _LOCKS_HELD.add(fh)
    return fh


def _release_lock(fh) -> None:
    if fh is not None:
        _LOCKS_HELD.discard(fh)
        fh.close()                      # closing releases the flock


def _forget_inherited_locks() -> None:
    """In a forked child (report.forked): close its copies of the lock files. The lock
    stays the parent's (an flock belongs to the open file both share and is let go when
    the last copy closes), so a run killed while its child writes leaves a folder seen
    as stranded at once, not only when the child is gone too."""
    for fh in _LOCKS_HELD:
        fh.close()
    _LOCKS_HELD.clear()


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_inherited_locks)


def _abandoned(folder: Path) -> bool:
    """True when no live run holds `folder`'s lock (its run was killed or crashed)."""
    if fcntl is None:
        return False
    try:
        fh = open(folder / LOCK_NAME, "a")
    except OSError:                     # no lock file: made before locking, or half-made
        return True
    try:
        fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except OSError:
        return False
    finally:
        fh.close()


def recover_stranded(final) -> list[str]:
    """Clean up after a run of `final` that was killed while building or committing it.

    An unlocked ``.<name>.partial-<t>`` is an unfinished folder: removed. A
    ``.<name>.old-<t>`` is the earlier folder moved aside by a commit that did not finish:
    put back when `final` is missing (the unfinished replacement removed), else removed
    (the commit had finished). Returns one line per action, also issued as a
    :class:`~fillstress.errors.FillstressWarning`.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> (d / ".run.old-0123456789ab").mkdir()
    >>> _ = (d / ".run.old-0123456789ab" / "bodies.csv").write_text("earlier")
    >>> import warnings
    >>> with warnings.catch_warnings(record=True):
    ...     print(recover_stranded(d / "run")[0])  # doctest: +ELLIPSIS
    put back the earlier results folder .../run (moved aside by an interrupted run)
    >>> (d / "run" / "bodies.csv").read_text()
    'earlier'
    """
    final = Path(os.fspath(final)).absolute()
    parent, name = final.parent, final.name
    if not parent.is_dir():
        return []
    notes = []
    live = set()
    for partial in sorted(parent.glob(f".{name}.partial-*")):
        token = partial.name.rsplit("-", 1)[-1]
        if partial.is_dir() and not partial.is_symlink() and _abandoned(partial):
            shutil.rmtree(partial, ignore_errors=True)
            notes.append(f"removed {partial.name}, an unfinished results folder of an "
                         "interrupted run")
        else:
            live.add(token)
    for old in sorted(parent.glob(f".{name}.old-*")):
        token = old.name.rsplit("-", 1)[-1]
        if token in live or old.is_symlink() or not old.is_dir():
            continue                    # its run is still committing, or not ours
        if not (final.exists() or final.is_symlink()):
            os.rename(old, final)
            notes.append(f"put back the earlier results folder {final} (moved aside by an "
                         "interrupted run)")
        else:
            shutil.rmtree(old, ignore_errors=True)
            notes.append(f"removed {old.name}, an earlier results folder an interrupted run "
                         "had already replaced")
    for note in notes:
        warnings.warn(note, FillstressWarning, stacklevel=3)
    return notes


@contextlib.contextmanager
def temporary_environ(name: str, value: str):
    """Set environment variable `name` for the with-block, then restore it (GDAL and
    trame read options from the environment)."""
    before = os.environ.get(name)
    os.environ[name] = value
    try:
        yield
    finally:
        if before is None:
            os.environ.pop(name, None)
        else:
            os.environ[name] = before
