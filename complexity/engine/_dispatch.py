"""How engines hand chunks of resamples to joblib, and keep BLAS on one thread.

One loop (:func:`map_chunks`) serves both engines: chunks are submitted in order and their
results come back in submission order, so everything computed from them is identical for any
``n_jobs`` and any joblib backend (``joblib.parallel_config(backend="dask")`` included). A
single chunk runs in the calling thread, without joblib's start-up cost.

BLAS threads: the exact engine's many small products run single-threaded, which fixes the
order of every floating-point sum (results then do not depend on n_jobs or on the other
resamples of a chunk) and avoids threads waiting on each other. :func:`single_blas` holds that
setting for a whole run in the calling process; the id of that process travels with every task
(:func:`call_with_single_blas`), so a task running in a thread of it does not set and restore
the process-wide setting again, while a task in another process (loky, dask) sets its own.
"""

from __future__ import annotations

import functools
import itertools
import os
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import AbstractContextManager
from typing import Any

from joblib import Parallel, delayed

__all__ = [
    "call_with_single_blas",
    "chunk_length",
    "group_by_index",
    "map_chunks",
    "single_blas",
    "slices",
]


@functools.lru_cache(maxsize=1)
def _blas_controller() -> Any:
    """One threadpoolctl controller per process (finding the libraries costs milliseconds)."""
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def single_blas() -> AbstractContextManager[Any]:
    """A context in which BLAS runs on one thread in this process.

    Examples
    --------
    >>> with single_blas():
    ...     pass
    """
    cm: AbstractContextManager[Any] = _blas_controller().limit(limits=1, user_api="blas")
    return cm


def call_with_single_blas(holder: int | None, compute: Callable[..., Any], *args: Any) -> Any:
    """``compute(*args)`` with BLAS single-threaded.

    ``holder`` is the id of the process holding :func:`single_blas` for the run (None: none
    does); in that process the setting is already in force.

    Examples
    --------
    >>> call_with_single_blas(None, sum, [1, 2, 3])
    6
    """
    if holder is not None and holder == os.getpid():
        return compute(*args)
    with single_blas():
        return compute(*args)


def map_chunks(
    task: Callable[..., Any],
    args: tuple[Any, ...],
    chunks: Iterable[Any],
    *,
    n_jobs: int | None,
    size: Callable[[Any], int],
    on_done: Callable[[int], None] | None = None,
    prefer: str | None = None,
) -> Iterator[Any]:
    """Yield ``task(*args, chunk)`` for every chunk, in order, through :class:`joblib.Parallel`.

    ``chunks`` is consumed lazily (joblib draws a few tasks ahead), so only the dispatched
    chunks exist at any time. After each result, ``on_done(size(result))`` reports progress.

    Examples
    --------
    >>> list(map_chunks(pow, (2,), [1, 2, 3], n_jobs=1, size=lambda v: 1))
    [2, 4, 8]
    """
    it = iter(chunks)
    first, second = next(it, None), next(it, None)
    if first is None:
        return
    results: Iterable[Any]
    if second is None:
        results = (task(*args, first),)
    else:
        every = itertools.chain((first, second), it)
        jobs = (delayed(task)(*args, chunk) for chunk in every)
        results = Parallel(n_jobs=n_jobs, prefer=prefer, return_as="generator")(jobs)
    for value in results:
        yield value
        if on_done is not None:
            on_done(size(value))


def group_by_index(resamples: Iterable[Any], size: int) -> Iterator[list[Any]]:
    """Consecutive resamples sharing ``index // size``: a chunk never depends on the others.

    A generator, so that only the chunks joblib has dispatched exist at any time (a lazy plan
    then never holds every resample's index arrays).

    Examples
    --------
    >>> from types import SimpleNamespace as R
    >>> [[r.index for r in g] for g in group_by_index([R(index=i) for i in (0, 1, 2, 5)], 2)]
    [[0, 1], [2], [5]]
    """
    group: list[Any] = []
    seen: set[int] = set()
    for r in resamples:
        if group and group[0].index // size == r.index // size and r.index not in seen:
            group.append(r)
        else:
            if group:
                yield group
            group, seen = [r], set()
        seen.add(r.index)
    if group:
        yield group


def chunk_length(n_resamples: int, n_jobs: int | None) -> int:
    """Resamples per task: about four tasks per worker, at most 32 resamples each.

    Only the task sizes depend on it; results are the same for any value.

    Examples
    --------
    >>> chunk_length(1000, 1), chunk_length(10, 1), chunk_length(0, 1)
    (32, 3, 1)
    """
    from joblib import effective_n_jobs

    workers = max(1, effective_n_jobs(n_jobs))
    return max(1, min(32, -(-n_resamples // (4 * workers))))


def slices(items: Sequence[Any], size: int) -> Iterator[Sequence[Any]]:
    """Consecutive slices of ``items`` of length ``size`` (the last may be shorter).

    Examples
    --------
    >>> list(slices([1, 2, 3, 4, 5], 2))
    [[1, 2], [3, 4], [5]]
    """
    for start in range(0, len(items), size):
        yield items[start : start + size]
