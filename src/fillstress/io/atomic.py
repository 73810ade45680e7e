"""Atomic file writes and the results-folder transaction.

A reader never sees half a file or half a results folder: each file is written under a
temporary name in its own folder and renamed into place (``os.replace`` is atomic within
one file system), and a run's folder is assembled as a hidden sibling and renamed into
place only once every file in it is complete.
"""
from __future__ import annotations

import os
import shutil
import uuid
from pathlib import Path, PurePosixPath
from typing import Callable

from ..errors import InputError

EXISTS_MESSAGE = "results folder exists; pass --overwrite or choose another"


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


class ResultsFolder:
    """Build a results folder as a hidden sibling and rename it into place when complete.

    Use as a context manager. On a clean exit the folder is committed; on any exception
    the partial folder is deleted and an earlier folder of the same name is untouched.

    Parameters
    ----------
    path : str or path-like
        Final folder. Its parent is created if missing.
    overwrite : bool
        Replace an existing folder of that name. Without it an existing folder is refused
        at construction, before any work is done. With it the old folder is moved aside
        only after the new one is complete, then deleted.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> root = pathlib.Path(tempfile.mkdtemp())
    >>> with ResultsFolder(root / "run1") as out:
    ...     _ = out.path("slices/a.txt").write_text("1")
    >>> sorted(p.relative_to(root).as_posix() for p in root.rglob("*"))
    ['run1', 'run1/slices', 'run1/slices/a.txt']
    >>> ResultsFolder(root / "run1")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: .../run1: results folder exists; pass --overwrite or choose another
    """

    def __init__(self, path, *, overwrite: bool = False):
        self.final = Path(os.fspath(path)).absolute()
        self.overwrite = bool(overwrite)
        self._token = uuid.uuid4().hex[:12]
        self.root = self.final.with_name(f".{self.final.name}.partial-{self._token}")
        self._check_target()
        self._open = False

    def _check_target(self) -> None:
        if self.final.exists() or self.final.is_symlink():
            if not self.final.is_dir():
                raise InputError("exists and is not a folder; choose another results name",
                                 file=self.final)
            if not self.overwrite:
                raise InputError(EXISTS_MESSAGE, file=self.final)

    def __enter__(self) -> "ResultsFolder":
        self.final.parent.mkdir(parents=True, exist_ok=True)
        self.root.mkdir()
        self._open = True
        return self

    def path(self, relative) -> Path:
        """The path of `relative` (POSIX-style, e.g. ``"vtk/pipes.vtp"``) inside the folder
        being built; sub-folders are created. Write through :func:`write_atomic`."""
        if not self._open:
            raise RuntimeError("ResultsFolder.path() is only valid inside the with-block")
        rel = PurePosixPath(str(relative).replace(os.sep, "/"))
        if rel.is_absolute() or not rel.parts or ".." in rel.parts:
            raise InputError(f"must be a relative path inside the results folder, got "
                             f"{str(relative)!r}", argument="relative")
        target = self.root.joinpath(*rel.parts)
        target.parent.mkdir(parents=True, exist_ok=True)
        return target

    def files(self) -> list[str]:
        """Relative POSIX paths of every file written so far, sorted."""
        return sorted(p.relative_to(self.root).as_posix() for p in self.root.rglob("*")
                      if p.is_file())

    def __exit__(self, exc_type, exc, tb) -> bool:
        self._open = False
        if exc_type is not None:
            shutil.rmtree(self.root, ignore_errors=True)
            return False
        try:
            self._commit()
        except BaseException:
            shutil.rmtree(self.root, ignore_errors=True)
            raise
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
            os.rename(self.root, self.final)
        except BaseException:
            os.rename(backup, self.final)  # put the earlier results back
            raise
        _fsync_dir(self.final.parent)
        shutil.rmtree(backup, ignore_errors=True)
