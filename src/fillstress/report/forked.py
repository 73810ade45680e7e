"""Work shared with a second process, on a machine with two cores or more: the sections
of a report (and a run's 3D scene beside them), and the tables, rasters, cube and VTK
files of a run.

Each piece is a function of data already in memory (a results folder read, a run's
results), and drawing figures or compressing grids is most of the writing time. A child
made by ``fork()`` shares those data without copying them; the two processes take the
pieces one at a time, each the next one not yet taken (the slow ones first), and the
child sends back what its pieces returned and the warnings they met (it writes nothing
to the terminal). Where fork is missing or unsafe (Windows, macOS), on one core, or when
a piece fails, the pieces left are made here in their order, so the result and any
error raised are those of making them one after another.
"""
from __future__ import annotations

import os
import pickle
import signal
import sys
import warnings
from collections.abc import Callable


def can_fork() -> bool:
    """True on Linux with at least two cores this process may run on."""
    return (sys.platform.startswith("linux") and hasattr(os, "fork")
            and len(os.sched_getaffinity(0)) >= 2)


def make_all(makers: dict[str, Callable[[], object]], first=()) -> dict[str, object]:
    """``{key: makers[key]()}`` in the order of `makers`, made by this process and a
    forked child, those in `first` taken first.

    Examples
    --------
    >>> made = make_all({"a": lambda: "A", "b": lambda: "B"})
    >>> made
    {'a': 'A', 'b': 'B'}
    """
    taken = _shared_counter() if len(makers) > 1 and can_fork() else None
    if taken is None:
        return {k: make() for k, make in makers.items()}
    order = [k for k in first if k in makers] + [k for k in makers if k not in first]

    def make_taken() -> dict:
        done = {}
        while True:
            with taken.get_lock():
                i = taken.value
                taken.value += 1
            if i >= len(order):
                return done
            done[order[i]] = makers[order[i]]()

    read, write = os.pipe()
    parent = os.getpid()
    try:
        with warnings.catch_warnings():   # Python 3.12+ on threads idle here (numba's)
            warnings.filterwarnings("ignore", "This process .* is multi-threaded",
                                    DeprecationWarning)
            pid = os.fork()
    except OSError:                                   # no process to be had: all here
        os.close(read)
        os.close(write)
        return {k: make() for k, make in makers.items()}
    if pid == 0:
        _child(make_taken, read, write, parent)
    os.close(write)
    try:
        here = make_taken()
    except Exception:  # noqa: BLE001 (all made again below, in order)
        _stop(pid, read)
        here, there = {}, {}
    except BaseException:                             # Ctrl-C: stop the child too
        _stop(pid, read)
        raise
    else:
        with os.fdopen(read, "rb") as sent:
            there, caught = _loaded(sent.read())
        os.waitpid(pid, 0)
        for text, category, filename, lineno in caught:   # the child's, shown here
            warnings.warn_explicit(text, category, filename, lineno)
    made = {**here, **there}
    return {k: made[k] if k in made else makers[k]() for k in makers}


def _child(make_taken, read: int, write: int, parent: int) -> None:
    """Make the sections taken, send them and the warnings met, and leave. Nothing is
    written to the terminal: a lock of it held at the fork by another thread (a progress
    bar's) would never be let go here."""
    try:
        _die_with(parent)
        os.close(read)
        sys.stdout = sys.stderr = open(os.devnull, "w")  # noqa: SIM115 (the child exits)
        with warnings.catch_warnings(record=True) as caught:
            try:
                done = make_taken()
            except BaseException:  # noqa: BLE001
                done = None                           # the parent makes what is missing
        notes = [(str(w.message), w.category, w.filename, w.lineno) for w in caught]
        with os.fdopen(write, "wb") as out:
            pickle.dump((done, notes), out)
    finally:
        os._exit(0)


def _die_with(parent: int) -> None:
    """Have Linux kill this child when its parent dies (prctl PR_SET_PDEATHSIG): a run
    killed mid-write leaves no orphan writing on into its folder and holding the folder's
    lock (the lock is the open file both share), which would keep the next run from
    seeing the folder stranded."""
    import ctypes
    try:
        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)   # 1: PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        return
    if os.getppid() != parent:                        # it died before the request
        os._exit(0)


def _shared_counter():
    """A count both processes see (shared memory and a semaphore), None where the system
    has none to give (no /dev/shm)."""
    import multiprocessing
    try:
        return multiprocessing.get_context("fork").Value("i", 0)
    except OSError:
        return None


def _stop(pid: int, read: int) -> None:
    os.kill(pid, signal.SIGKILL)
    os.close(read)
    os.waitpid(pid, 0)


def _loaded(data: bytes) -> tuple[dict, list]:
    """(sections made, warnings met) sent by the child; none when it died first."""
    try:
        done, notes = pickle.loads(data)
    except Exception:  # noqa: BLE001
        return {}, []
    return done or {}, notes
