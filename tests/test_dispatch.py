"""Tests for complexity.engine._dispatch: the one joblib loop and the single-threaded BLAS.

References: joblib's documented contract (results of ``Parallel`` in submission order) and
threadpoolctl's report of the BLAS thread count.
"""

from __future__ import annotations

import os
from types import SimpleNamespace

import pytest
from threadpoolctl import threadpool_info

from complexity.engine._dispatch import (
    call_with_single_blas,
    group_by_index,
    map_chunks,
    single_blas,
    slices,
)


def _blas_threads() -> list[int]:
    return [m["num_threads"] for m in threadpool_info() if m["user_api"] == "blas"]


def _square_all(offset: int, chunk: list[int]) -> list[int]:
    return [offset + v * v for v in chunk]


@pytest.mark.parametrize(("n_jobs", "prefer"), [(1, "threads"), (2, "threads"), (2, "processes")])
def test_results_come_back_in_submission_order(n_jobs, prefer) -> None:
    done: list[int] = []
    chunks = list(slices(list(range(23)), 4))
    got = list(
        map_chunks(
            _square_all, (1,), chunks, n_jobs=n_jobs, size=len, on_done=done.append, prefer=prefer
        )
    )
    assert got == [[1 + v * v for v in c] for c in chunks]
    assert done == [len(c) for c in chunks]
    assert list(map_chunks(_square_all, (0,), [], n_jobs=2, size=len)) == []


def test_chunks_are_fixed_by_index_never_by_the_other_resamples() -> None:
    rs = [SimpleNamespace(index=i) for i in (0, 1, 2, 3, 7, 8, 9, 10, 11)]
    groups = [[r.index for r in g] for g in group_by_index(rs, 4)]
    assert groups == [[0, 1, 2, 3], [7], [8, 9, 10, 11]]
    # a subset (a resumed run) falls into the same chunks
    assert [[r.index for r in g] for g in group_by_index(rs[4:6], 4)] == [[7], [8]]


def test_blas_is_single_threaded_inside_and_restored_after() -> None:
    before = _blas_threads()
    if not before:
        pytest.skip("no BLAS library reported by threadpoolctl")
    with single_blas():
        assert set(_blas_threads()) == {1}
        # the holder's own threads find the setting in force and leave it alone
        assert set(call_with_single_blas(os.getpid(), _blas_threads)) == {1}
    assert _blas_threads() == before
    # a task in a process that holds nothing sets and restores it itself
    assert set(call_with_single_blas(None, _blas_threads)) == {1}
    assert _blas_threads() == before
