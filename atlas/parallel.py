"""Work shared among forked processes: the inputs are inherited, not pickled.

A process pool normally pickles every task's arguments to its workers. The build's inputs are
large (the page contexts of the 400-object synthetic atlas pickle to 59 MB; its output files
are 120 MB). Here the inputs are put in a module global *before* the workers are forked, so
each worker reads them from the memory it shares with its parent; only small task
descriptions (lists of indices) go out, and only results come back. Rendering that atlas's
3,184 pages, same run: one process 19.7 s; two forked workers 12.0 s wall and 20.0 s CPU in
all (against 19.3 s), so sharing by fork costs about 4%.

Where ``fork`` is not offered (Windows) or ``jobs`` is 1, the work runs in this process; the
result is the same either way, in the same order.
"""

from __future__ import annotations

import multiprocessing
from collections.abc import Callable, Sequence
from concurrent.futures import Future, ProcessPoolExecutor
from typing import Any

# Fewer work items than this are done in one process: forking costs more than it saves.
# (Tests set it to 0 to run every parallel path on a small atlas.)
MIN_ITEMS = 100

_SHARED: dict[int, Any] = {}  # token -> inputs, set before a pool forks
_NEXT = [0]


def can_fork() -> bool:
    return "fork" in multiprocessing.get_all_start_methods()


def _call(token: int, func: Callable, task: Any) -> Any:
    return func(_SHARED[token], task)


def map_forked(func: Callable[[Any, Any], Any], shared: Any, tasks: Sequence[Any],
               jobs: int) -> list[Any]:
    """``[func(shared, task) for task in tasks]``, in ``jobs`` forked processes.

    ``func`` must be a module-level function; ``shared`` is inherited by the workers (never
    pickled); each task and each result is pickled.
    """
    if jobs <= 1 or len(tasks) <= 1 or not can_fork():
        return [func(shared, task) for task in tasks]
    token = _NEXT[0] = _NEXT[0] + 1
    _SHARED[token] = shared
    try:
        context = multiprocessing.get_context("fork")
        with ProcessPoolExecutor(max_workers=min(jobs, len(tasks)), mp_context=context) as pool:
            futures = [pool.submit(_call, token, func, task) for task in tasks]
            return [f.result() for f in futures]
    finally:
        del _SHARED[token]


class Background:
    """``func(shared)`` computed in one forked process while this one goes on working.

    ``result()`` waits for it. Without fork (or with ``enabled=False``) the work is done at
    once, in this process, so the value is the same either way.
    """

    def __init__(self, func: Callable[[Any], Any], shared: Any, enabled: bool = True) -> None:
        self._pool: ProcessPoolExecutor | None = None
        self._future: Future | None = None
        self._value: Any = None
        if enabled and can_fork():
            self._token = _NEXT[0] = _NEXT[0] + 1
            _SHARED[self._token] = shared
            self._pool = ProcessPoolExecutor(max_workers=1,
                                             mp_context=multiprocessing.get_context("fork"))
            self._future = self._pool.submit(_call, self._token, _apply, func)
        else:
            self._value = func(shared)

    def result(self) -> Any:
        if self._pool is None:
            return self._value
        try:
            assert self._future is not None
            return self._future.result()
        finally:
            self._pool.shutdown()
            _SHARED.pop(self._token, None)
            self._pool = None


def _apply(shared: Any, func: Callable[[Any], Any]) -> Any:
    return func(shared)
