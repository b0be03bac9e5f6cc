"""Parallel backends: a sweep gives bit-identical results on any joblib backend.

DESIGN.md ("Randomness", "Parallelism"): every resample and every estimator seed is a child of one
SeedSequence addressed by key, and all parallel work goes through ``joblib.Parallel``; so loky
processes, threads and a dask.distributed cluster must all reproduce the ``n_jobs=1`` run bit for
bit. The reference for every check below is that single-process run of the same call.
"""

from __future__ import annotations

import warnings

import joblib
import numpy as np
import pandas as pd
import pytest
from sklearn.tree import ExtraTreeRegressor

import complexity as cx

X, Y = cx.datasets.pressure_sensor()

CASES = {
    # least-squares ladder on the exact engine; 2,000 resamples make several chunks (tasks) of
    # its batched solves (at most 1,000 resamples per chunk)
    "polynomial-exact": lambda: (cx.PolynomialLadder(range(0, 5)), cx.Bootstrap(2000), {}),
    # the same ladder on the generic engine (one clone-and-fit per resample and capacity)
    "polynomial-generic": lambda: (
        cx.PolynomialLadder(range(0, 5)),
        cx.Bootstrap(16),
        {"engine": "generic"},
    ),
    # a randomised estimator (random split points) whose random_state the sweep seeds per fit,
    # on repeated K-fold: catches any seed that depends on which worker ran the fit
    "extra-tree-cv": lambda: (
        cx.ParamLadder(ExtraTreeRegressor(), "max_depth", [1, 2, 4]),
        cx.CrossValidation(4, n_repeats=2),
        {},
    ),
}


def run(case: str, **kw) -> cx.SweepResult:
    ladder, plan, options = CASES[case]()
    kw = {"random_state": 2026, "keep_predictions": True, **options, **kw}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(ladder, X, Y, plan=plan, **kw)


@pytest.fixture(scope="module")
def serial() -> dict[str, cx.SweepResult]:
    return {case: run(case, n_jobs=1) for case in CASES}


def assert_identical(a: cx.SweepResult, b: cx.SweepResult) -> None:
    pd.testing.assert_frame_equal(a.curves, b.curves, check_exact=True)
    pd.testing.assert_series_equal(a.stability, b.stability, check_exact=True)
    np.testing.assert_array_equal(a.predictions, b.predictions)  # every single prediction
    assert a.recommended == b.recommended


def test_engines_and_seeding_matter_so_the_checks_can_fail(serial):
    # a different seed changes the curves: equality below is not an accident of fixed data
    other = run("extra-tree-cv", n_jobs=1, random_state=None)
    assert not np.array_equal(other.predictions, serial["extra-tree-cv"].predictions)
    assert serial["polynomial-exact"].metadata["engine"] == "exact"
    assert serial["polynomial-generic"].metadata["engine"] == "generic"


@pytest.mark.parametrize("case", list(CASES))
def test_loky_two_workers(serial, case):
    with joblib.parallel_config(backend="loky"):
        assert_identical(run(case, n_jobs=2), serial[case])


@pytest.mark.parametrize("case", list(CASES))
def test_threading_backend(serial, case):
    with joblib.parallel_config(backend="threading", n_jobs=2):
        assert_identical(run(case), serial[case])


def test_dask_local_cluster(serial, tmp_path):
    distributed = pytest.importorskip("distributed")
    with (
        distributed.LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=False,  # threads in this process keep the test fast; loky covers processes
            dashboard_address=None,
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        workers = set(client.scheduler_info()["workers"])
        assert len(workers) == 2
        for case in CASES:
            with distributed.get_task_stream(client) as stream:
                with joblib.parallel_config(backend="dask"):
                    result = run(case)
            # the work really ran as tasks on the cluster's workers
            ran_on = {task["worker"] for task in stream.data}
            assert len(stream.data) >= 2 and ran_on <= workers, case
            assert_identical(result, serial[case])
        # a checkpointed sweep on the cluster, resumed on the cluster, is identical too
        with joblib.parallel_config(backend="dask"):
            run("polynomial-generic", checkpoint=tmp_path)
            resumed = run("polynomial-generic", checkpoint=tmp_path)
        assert_identical(resumed, serial["polynomial-generic"])
