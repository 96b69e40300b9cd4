"""Work over many records at once: a pause of the cyclic garbage collector, and a second process.

Loading 100k records builds millions of small, long-lived, acyclic objects (dicts, lists, floats). The
cyclic collector counts them as new allocations and, every time they outnumber a quarter of the heap,
traverses the whole heap; on a 100k-species dataset these passes cost seconds of a check that should
take a few, while finding nothing (records hold no reference cycles, and reference counting frees
them). ``paused_gc`` turns the collector off for such a stretch and restores the previous state, so a
caller that had it off keeps it off; nested pauses are harmless.

``split_map`` runs half of a pure per-record computation (the schema pass) in a forked child on a
machine with a second core; the child reads the records from the memory it shares with the parent at
the fork, so nothing but the (few) results crosses the pipe.
"""

from __future__ import annotations

import gc
import os
import pickle
import signal
import threading
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import TypeVar

T = TypeVar("T")
R = TypeVar("R")


@contextmanager
def paused_gc() -> Iterator[None]:
    """Disable the cyclic garbage collector inside the block (reference counting still frees)."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


# -- a second process ------------------------------------------------------------------------------------

#: Fewer items than this are not worth a process (a fork and a pipe cost tens of milliseconds).
SPLIT_MIN_ITEMS = 5_000
#: Off: every split_map runs in this process (tests compare both ways).
SPLIT = True


def _can_fork() -> bool:
    # A fork copies only the calling thread: with other threads alive (the terminal app's workers) a
    # lock one of them holds would stay locked in the child forever. Fork only a single-threaded process.
    return SPLIT and hasattr(os, "fork") and threading.active_count() == 1 and (os.cpu_count() or 1) > 1


def split_map(fn: Callable[[Sequence[T]], list[R]], items: Sequence[T]) -> list[R]:
    """``fn(items)``, computed as ``fn(first half) + fn(second half)`` with the second half in a forked
    child process when that can help: many items, more than one CPU, a single-threaded process.

    ``fn`` must be deterministic and its results picklable; the child sees the parent's memory as it
    was at the fork (no argument is pickled), and sends back only the results. Any failure of the
    child (killed, out of memory, an exception) falls back to computing its half here, so the result
    is always that of ``fn(items)`` split in two.
    """
    n = len(items)
    if n < SPLIT_MIN_ITEMS or not _can_fork():
        return fn(items)
    half = n // 2
    rfd, wfd = os.pipe()
    try:
        pid = os.fork()
    except OSError:
        os.close(rfd)
        os.close(wfd)
        return fn(items)
    if pid == 0:  # the child: compute, send, and leave without running the parent's exit handlers
        code = 1
        try:
            os.close(rfd)
            data = pickle.dumps(fn(items[half:]), protocol=pickle.HIGHEST_PROTOCOL)
            with os.fdopen(wfd, "wb") as out:
                out.write(data)
            code = 0
        finally:
            os._exit(code)
    os.close(wfd)
    with os.fdopen(rfd, "rb") as inp:
        try:
            first = fn(items[:half])
            data = inp.read()
        except BaseException:
            os.kill(pid, signal.SIGKILL)  # our own child, by its id
            os.waitpid(pid, 0)
            raise
    _, status = os.waitpid(pid, 0)
    if os.waitstatus_to_exitcode(status) == 0:
        try:
            return first + pickle.loads(data)
        except (pickle.UnpicklingError, EOFError, ValueError):
            pass
    return first + fn(items[half:])
