"""Progress bar: counts fits, works with several workers, silent when off."""

from __future__ import annotations

import io
import threading
import warnings

import joblib
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import complexity as cx
from complexity._progress import FitCounter, _clock


def test_disabled_counter_writes_nothing():
    out = io.StringIO()
    counter = FitCounter(10, False, stream=out)
    counter.update(4)
    counter.update(6)
    counter.close()
    assert out.getvalue() == ""
    assert counter.done == 10


def test_enabled_counter_draws_the_final_count_once_and_ends_the_line():
    out = io.StringIO()
    counter = FitCounter(400, True, stream=out, min_interval=0.0)
    for _ in range(4):
        counter.update(100)
    counter.close()
    counter.close()  # closing twice must not add another line
    text = out.getvalue()
    assert text.endswith("\n") and text.count("\n") == 1
    last = text.rstrip("\n").split("\r")[-1]
    assert "400/400" in last and "100%" in last and "done in" in last
    assert text.count("400/400") == 1  # the final state is drawn once, not again on close
    assert "[" + "#" * 30 + "]" in last


def test_counter_clamps_and_ignores_updates_after_close():
    out = io.StringIO()
    counter = FitCounter(5, True, stream=out)
    counter.update(3)
    counter.update(9)
    assert counter.done == 5
    counter.close()
    counter.update(1)
    assert counter.done == 5


def test_counter_line_shows_time_left_midway():
    counter = FitCounter(10, False)
    counter.update(5)
    assert "5/10" in counter.line() and " 50%" in counter.line() and "left" in counter.line()


def test_zero_fits_and_bad_total():
    out = io.StringIO()
    with FitCounter(0, True, stream=out):
        pass
    assert "0/0" in out.getvalue()
    with pytest.raises(ValueError, match="total"):
        FitCounter(-1, True)


def test_broken_stream_does_not_stop_the_work():
    out = io.StringIO()
    counter = FitCounter(3, True, stream=out)
    out.close()
    counter.update(3)  # the write fails; the count still goes on
    counter.close()
    assert counter.done == 3 and counter.enabled is False


def test_clock_format():
    # common practice: minutes:seconds, hours when needed
    assert _clock(75.2) == "1:15"
    assert _clock(3725) == "1:02:05"
    assert _clock(-3) == "0:00"


@settings(max_examples=60, deadline=None)
@given(total=st.integers(0, 500), steps=st.lists(st.integers(0, 80), max_size=30))
def test_count_is_the_clamped_sum(total, steps):
    # law: after any updates the count is min(total, sum of updates)
    counter = FitCounter(total, False)
    for s in steps:
        counter.update(s)
    assert counter.done == min(total, sum(steps))


def test_updates_from_threads_add_up():
    counter = FitCounter(10_000, True, stream=io.StringIO(), min_interval=0.0)

    def work():
        for _ in range(500):
            counter.update(1)

    threads = [threading.Thread(target=work) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    counter.close()
    assert counter.done == 4000


def _sweep(**kw):
    X, y = cx.datasets.pressure_sensor()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        return cx.sweep(
            cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(6), random_state=0, **kw
        )


@pytest.mark.parametrize("engine", ["generic", "exact"])
def test_sweep_progress_counts_every_fit_with_two_workers(engine, capsys):
    # threads instead of processes keep the test quick; the bar is fed from the main process
    # after each finished chunk either way (worker processes never write to it)
    with joblib.parallel_config(backend="threading"):
        result = _sweep(progress=True, n_jobs=2, engine=engine)
    err = capsys.readouterr().err
    final = err.rstrip("\n").split("\r")[-1]
    assert "24/24" in final and "100%" in final  # 6 resamples x 4 degrees
    assert capsys.readouterr().out == ""
    # the same result as without the bar and with one worker
    quiet = _sweep(progress=False, n_jobs=1, engine=engine)
    assert capsys.readouterr().err == ""
    assert result.curves.equals(quiet.curves)
