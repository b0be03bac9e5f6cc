"""Tests for complexity.checkpoint: resuming interrupted sweeps, refusing foreign checkpoints.

The reference for every resume check is an uninterrupted run of the same call in the same
environment: a resumed sweep must reproduce it bit for bit (common practice for restartable
computations: a restart must not change the answer).
"""

from __future__ import annotations

import json
import re
import signal
import subprocess
import sys
import threading
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from sklearn.base import BaseEstimator, RegressorMixin
from sklearn.model_selection import KFold

import complexity as cx
from complexity.checkpoint import CheckpointMismatchError, check_path

X, Y = cx.datasets.pressure_sensor()
SEED = 11
N_RESAMPLES = 24
DELAY = 0.02  # seconds per fit in the killed run, so the kill lands mid-sweep


class SleepyPolynomial(RegressorMixin, BaseEstimator):
    """A least-squares polynomial in the first column that sleeps ``delay`` seconds per fit.

    ``fits`` counts calls to fit in this process; ``interrupt_after`` raises KeyboardInterrupt
    (as Ctrl-C would) once that many fits have run.
    """

    fits = 0
    interrupt_after: int | None = None
    _lock = threading.Lock()

    def __init__(self, degree: int = 1, delay: float = 0.0) -> None:
        self.degree = degree
        self.delay = delay

    def fit(self, X, y, sample_weight=None):
        with SleepyPolynomial._lock:
            SleepyPolynomial.fits += 1
            count = SleepyPolynomial.fits
        limit = SleepyPolynomial.interrupt_after
        if limit is not None and count > limit:
            raise KeyboardInterrupt
        if self.delay:
            time.sleep(self.delay)
        w = None if sample_weight is None else np.sqrt(sample_weight)
        self.coef_ = np.polynomial.Polynomial.fit(np.asarray(X)[:, 0], y, self.degree, w=w)
        return self

    def predict(self, X):
        return self.coef_(np.asarray(X)[:, 0])


def ladder(delay: float = 0.0) -> cx.ParamLadder:
    return cx.ParamLadder(SleepyPolynomial(delay=delay), "degree", [0, 1, 2])


def run_sweep(checkpoint=None, delay: float = 0.0, **kw) -> cx.SweepResult:
    """The sweep every test resumes (also run by the killed subprocess)."""
    kw.setdefault("plan", cx.Bootstrap(N_RESAMPLES))
    kw.setdefault("random_state", SEED)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(ladder(delay), X, Y, checkpoint=checkpoint, **kw)


def stored(folder: Path) -> list[Path]:
    return sorted(folder.glob("resample-*.npz"))


def assert_identical(a: cx.SweepResult, b: cx.SweepResult) -> None:
    # bit for bit: exact float equality, same NaN positions, same recommendation
    pd.testing.assert_frame_equal(a.curves, b.curves, check_exact=True)
    pd.testing.assert_series_equal(a.stability, b.stability, check_exact=True)
    assert a.recommended == b.recommended
    assert a.rules.equals(b.rules)
    assert a.noise == b.noise


@pytest.fixture(scope="module")
def reference() -> cx.SweepResult:
    return run_sweep()


@pytest.fixture
def fits():
    SleepyPolynomial.fits, SleepyPolynomial.interrupt_after = 0, None
    yield SleepyPolynomial
    SleepyPolynomial.fits, SleepyPolynomial.interrupt_after = 0, None


def test_killed_process_resumes_bit_identical(tmp_path, fits):
    folder = tmp_path / "ck"
    tests_dir, repo = Path(__file__).resolve().parent, Path(__file__).resolve().parent.parent
    script = (
        "import sys\n"
        f"sys.path[:0] = [{str(repo)!r}, {str(tests_dir)!r}]\n"
        "from test_checkpoint import run_sweep\n"
        f"run_sweep({str(folder)!r}, delay={DELAY!r})\n"
    )
    proc = subprocess.Popen(
        [sys.executable, "-c", script], stdout=subprocess.PIPE, stderr=subprocess.PIPE
    )
    try:
        deadline = time.monotonic() + 120
        while len(stored(folder)) < 4:  # a first chunk of resamples is on disk
            if proc.poll() is not None:
                pytest.fail(f"the sweep ended before it was killed: {proc.stderr.read().decode()}")
            assert time.monotonic() < deadline, "no checkpoint file appeared within 120 s"
            time.sleep(0.01)
        proc.send_signal(signal.SIGKILL)
    finally:
        proc.kill()
        proc.wait()
        proc.stdout.close()
        proc.stderr.close()
    assert proc.returncode == -signal.SIGKILL
    n_done = len(stored(folder))
    assert 4 <= n_done < N_RESAMPLES  # killed mid-sweep

    resumed = run_sweep(folder, delay=DELAY)
    # only the missing resamples were fitted, plus the full-data fit of each capacity
    assert fits.fits == (N_RESAMPLES - n_done) * 3 + 3
    assert len(stored(folder)) == N_RESAMPLES
    uninterrupted = run_sweep(delay=DELAY)
    assert_identical(resumed, uninterrupted)


@pytest.mark.parametrize("n_jobs_after", [1, 2])
def test_ctrl_c_then_resume_with_any_n_jobs(tmp_path, fits, reference, n_jobs_after):
    fits.fits, fits.interrupt_after = 0, 3 + 3 * 10  # full fits, then ten resamples' worth
    with pytest.raises(KeyboardInterrupt):
        run_sweep(tmp_path)
    n_done = len(stored(tmp_path))
    assert 0 < n_done < N_RESAMPLES
    fits.fits, fits.interrupt_after = 0, None
    if n_jobs_after == 1:
        resumed = run_sweep(tmp_path)
        assert fits.fits == (N_RESAMPLES - n_done) * 3 + 3
    else:
        import joblib

        with joblib.parallel_config(backend="threading"):
            resumed = run_sweep(tmp_path, n_jobs=2)
    assert_identical(resumed, reference)


def test_finished_checkpoint_refits_nothing_but_the_full_data_fit(tmp_path, fits, reference):
    first = run_sweep(tmp_path)
    fits.fits = 0
    again = run_sweep(tmp_path, rule="min", noise=0.0016)  # rule and noise may change
    assert fits.fits == 3
    assert_identical(first, reference)
    pd.testing.assert_frame_equal(
        again.curves[["test_mse", "variance", "bias_sq_plus_noise"]],
        reference.curves[["test_mse", "variance", "bias_sq_plus_noise"]],
        check_exact=True,
    )
    assert again.rule == "min"


def test_keep_predictions_survive_a_resume(tmp_path, fits):
    ref = run_sweep(keep_predictions=True)
    fits.fits, fits.interrupt_after = 0, 3 + 3 * 7
    with pytest.raises(KeyboardInterrupt):
        run_sweep(tmp_path, keep_predictions=True)
    assert 0 < len(stored(tmp_path)) < N_RESAMPLES
    fits.interrupt_after = None
    resumed = run_sweep(tmp_path, keep_predictions=True)
    np.testing.assert_array_equal(resumed.predictions, ref.predictions)


def test_seed_none_reuses_the_stored_seed(tmp_path, fits):
    first = run_sweep(tmp_path, random_state=None)
    fits.fits = 0
    again = run_sweep(tmp_path, random_state=None)
    assert fits.fits == 3
    assert again.metadata["seed_entropy"] == first.metadata["seed_entropy"]
    assert_identical(first, again)


@pytest.mark.parametrize(
    ("change", "named"),
    [
        ({"y": Y + 0.001}, "data (y)"),
        ({"X": X + 1.0}, "data (X)"),
        ({"plan": cx.Bootstrap(N_RESAMPLES + 1)}, "plan"),
        ({"plan": cx.CrossValidation(5)}, "plan"),
        ({"random_state": SEED + 1}, "seed"),
        ({"ladder": cx.ParamLadder(SleepyPolynomial(), "degree", [0, 1, 3])}, "ladder"),
        ({"sample_weight": np.linspace(1, 2, len(Y))}, "sample_weight"),
    ],
    ids=["y", "X", "n_resamples", "plan-kind", "seed", "ladder", "weights"],
)
def test_a_different_sweep_is_refused(tmp_path, change, named):
    run_sweep(tmp_path, plan=cx.Bootstrap(N_RESAMPLES))
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    kw = {"X": X, "y": Y, "plan": cx.Bootstrap(N_RESAMPLES), "random_state": SEED}
    kw.update(change)
    lad = kw.pop("ladder", ladder())
    with pytest.raises(CheckpointMismatchError, match="different sweep.*" + re.escape(named)):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", cx.CapacityWarning)
            cx.sweep(lad, kw.pop("X"), kw.pop("y"), checkpoint=tmp_path, **kw)
    # never mixed in: the folder is left exactly as it was
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before


def test_mismatch_error_is_a_value_error_naming_both_values(tmp_path):
    run_sweep(tmp_path)
    with pytest.raises(
        ValueError, match=r"plan: stored .*'n_resamples': 24.*now .*'n_resamples': 30"
    ):
        run_sweep(tmp_path, plan=cx.Bootstrap(30))


def test_other_library_versions_are_refused(tmp_path):
    run_sweep(tmp_path)
    manifest = tmp_path / "checkpoint.json"
    body = json.loads(manifest.read_text())
    body["fingerprint"]["versions"]["numpy"] = "0.0.1"
    manifest.write_text(json.dumps(body))
    with pytest.raises(CheckpointMismatchError, match=r"versions: stored .*0\.0\.1"):
        run_sweep(tmp_path)


def test_unseeded_splitter_is_refused_on_rerun(tmp_path):
    # KFold(shuffle=True) without a random_state draws new folds on every call
    run_sweep(tmp_path, plan=KFold(4, shuffle=True))
    with pytest.raises(CheckpointMismatchError, match="training_sets differ"):
        run_sweep(tmp_path, plan=KFold(4, shuffle=True))


def test_seeded_splitter_resumes(tmp_path, fits):
    plan = KFold(6, shuffle=True, random_state=0)
    ref = run_sweep(plan=plan)
    fits.fits, fits.interrupt_after = 0, 3 + 3 * 3
    with pytest.raises(KeyboardInterrupt):
        run_sweep(tmp_path, plan=plan)
    assert 0 < len(stored(tmp_path)) < 6
    fits.interrupt_after = None
    assert_identical(run_sweep(tmp_path, plan=plan), ref)


def test_simulation_resumes(tmp_path, fits):
    def truth(x):
        return np.sin(3 * x[:, 0])

    def plan():
        return cx.Simulation(truth, 0.1, np.linspace(0, 1, 15), n_resamples=12)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        ref = cx.sweep(ladder(), plan=plan(), random_state=5)
        fits.fits, fits.interrupt_after = 0, 3 * 5
        with pytest.raises(KeyboardInterrupt):
            cx.sweep(ladder(), plan=plan(), random_state=5, checkpoint=tmp_path)
        n_done = len(stored(tmp_path))
        fits.fits, fits.interrupt_after = 0, None
        resumed = cx.sweep(ladder(), plan=plan(), random_state=5, checkpoint=tmp_path)
    assert 0 < n_done < 12
    assert fits.fits == 3 * (12 - n_done)  # a simulation has no full-data fit
    assert_identical(resumed, ref)


def test_damaged_and_half_written_files_are_refitted(tmp_path, fits, reference):
    run_sweep(tmp_path)
    files = stored(tmp_path)
    files[3].write_bytes(files[3].read_bytes()[:100])  # damaged on disk
    (tmp_path / ".tmp-abc.npz").write_bytes(b"partial")  # a write cut short by a kill
    fits.fits = 0
    resumed = run_sweep(tmp_path)
    assert fits.fits == 3 + 3  # the full-data fit and the one damaged resample
    assert not list(tmp_path.glob(".tmp-*"))
    assert_identical(resumed, reference)


def test_a_swapped_outcome_file_is_refused(tmp_path):
    run_sweep(tmp_path)
    files = stored(tmp_path)
    files[1].write_bytes(files[2].read_bytes())
    with pytest.raises(CheckpointMismatchError, match="does not match resample 1"):
        run_sweep(tmp_path)


def test_files_are_plain_json_and_npz(tmp_path):
    result = run_sweep(tmp_path)
    body = json.loads((tmp_path / "checkpoint.json").read_text(encoding="utf-8"))
    assert body["format"] == "complexity.checkpoint"
    fp = body["fingerprint"]
    assert fp["plan"] == {"kind": "bootstrap", "n_resamples": N_RESAMPLES}
    assert fp["seed"] == {"entropy": str(SEED), "spawn_key": []}
    assert fp["engine"] == result.metadata["engine"]
    assert {"X", "y"} <= set(fp["data"])
    assert len(stored(tmp_path)) == N_RESAMPLES
    with np.load(stored(tmp_path)[0], allow_pickle=False) as archive:  # no pickle needed
        assert int(archive["index"]) == 0
        assert archive["residuals"].shape == (archive["test"].size, 3)
        assert archive["residuals"].dtype == np.float64


def test_failures_are_stored_and_restored(tmp_path):
    # a capacity whose fit fails in every resample: its messages come back from disk unchanged
    lad = cx.ParamLadder(SleepyPolynomial(), "degree", [0, 1, -1])  # degree -1 is refused by numpy
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        ref = cx.sweep(lad, X, Y, plan=cx.Bootstrap(8), random_state=0)
        cx.sweep(lad, X, Y, plan=cx.Bootstrap(8), random_state=0, checkpoint=tmp_path)
        again = cx.sweep(lad, X, Y, plan=cx.Bootstrap(8), random_state=0, checkpoint=tmp_path)
    assert len(ref.failures) == 1
    assert again.failures.equals(ref.failures)
    assert_identical(again, ref)


@pytest.mark.parametrize("bad", [3, b"folder", ["a"], 1.5])
def test_checkpoint_of_the_wrong_kind_is_refused(bad):
    with pytest.raises(TypeError, match="checkpoint must be None or a folder path"):
        run_sweep(bad)


def test_checkpoint_that_is_a_file_or_foreign_folder_is_refused(tmp_path):
    file = tmp_path / "f.txt"
    file.write_text("x")
    with pytest.raises(ValueError, match=r"checkpoint=.* is a file"):
        check_path(file)
    with pytest.raises(ValueError, match="checkpoint must be a folder path; got an empty string"):
        check_path("")
    with pytest.raises(CheckpointMismatchError, match=r"not empty and holds no checkpoint\.json"):
        run_sweep(tmp_path)
    assert [p.name for p in tmp_path.iterdir()] == ["f.txt"]


def test_new_nested_folder_is_created(tmp_path, reference):
    result = run_sweep(tmp_path / "a" / "b")
    assert (tmp_path / "a" / "b" / "checkpoint.json").is_file()
    assert_identical(result, reference)


def test_exact_engine_resumes_from_a_partial_folder(tmp_path):
    # a folder holding only some resamples is what an interrupted run leaves behind; the exact
    # engine batches resamples in chunks, so this checks a chunk refitted from a subset
    def sweep(checkpoint=None):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", cx.CapacityWarning)
            return cx.sweep(
                cx.PolynomialLadder(range(0, 6)),
                X,
                Y,
                plan=cx.Bootstrap(300),
                random_state=4,
                keep_predictions=True,
                checkpoint=checkpoint,
            )

    ref = sweep()
    assert ref.metadata["engine"] == "exact"
    sweep(tmp_path)
    for file in stored(tmp_path)[5:290:2]:  # holes inside and across the engine's chunks
        file.unlink()
    resumed = sweep(tmp_path)
    assert len(stored(tmp_path)) == 300
    assert_identical(resumed, ref)
    np.testing.assert_array_equal(resumed.predictions, ref.predictions)
