"""Command line: the CSV sweep end to end, the demo, and one clear line for each bad input."""

from __future__ import annotations

import os
import subprocess
import sys
import warnings
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import numpy as np
import pandas as pd
import pytest

import complexity as cx
from complexity.cli import MIN_ROWS, main

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def sensor_csv(tmp_path_factory) -> Path:
    X, y = cx.datasets.pressure_sensor()
    frame = pd.DataFrame({"temperature_c": X["temperature_c"], "offset_kpa": y, "operator": "A"})
    path = tmp_path_factory.mktemp("csv") / "sensor.csv"
    frame.to_csv(path, index=False)
    return path


def _one_error_line(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    return lines[0]


def test_sweep_csv_end_to_end(sensor_csv, tmp_path, capsys):
    out = {k: tmp_path / f"out.{k}" for k in ("html", "json", "csv", "png")}
    code = main(
        [
            "sweep",
            str(sensor_csv),
            "--target",
            "offset_kpa",
            "--predictors",
            "temperature_c",
            "--degrees",
            "0-6",
            "--bootstrap",
            "20",
            "--seed",
            "5",
            "--rule",
            "one-se",
            "--target-units",
            "kPa",
            "--predictor-units",
            "°C",
            "--report",
            str(out["html"]),
            "--save-result",
            str(out["json"]),
            "--curves-csv",
            str(out["csv"]),
            "--png",
            str(out["png"]),
            "--png-view",
            "fits",
        ]
    )
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert captured.err == ""  # stderr is not a terminal here: no progress bar by default
    assert all(p.exists() and p.stat().st_size > 0 for p in out.values())
    assert "Recommended degree:" in captured.out
    for p in out.values():
        assert "wrote " in captured.out and str(p) in captured.out

    # the same sweep through the library gives the same curves as every output
    X, y = cx.datasets.pressure_sensor()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", cx.CapacityWarning)
        direct = cx.sweep(
            cx.PolynomialLadder(range(0, 7)), X, y, plan=cx.Bootstrap(20), random_state=5
        )
    loaded = cx.load_result(out["json"])
    # values exactly equal; JSON reading may turn an integer column into floats
    pd.testing.assert_frame_equal(loaded.curves, direct.curves, check_dtype=False)
    assert loaded.recommended == direct.recommended
    table = pd.read_csv(out["csv"], index_col="degree")
    pd.testing.assert_frame_equal(
        table.drop(columns="share_chosen"), direct.curves, check_dtype=False
    )
    np.testing.assert_allclose(table["share_chosen"], direct.stability.to_numpy())
    assert out["png"].read_bytes().startswith(b"\x89PNG\r\n\x1a\n")  # PNG spec, section 5.2
    page = out["html"].read_text(encoding="utf-8")
    assert "complexity sweep" in page and "--seed 5" in page and "https://" not in page


def test_sweep_csv_feature_counts_and_folds(tmp_path, capsys):
    from sklearn.datasets import load_diabetes  # a data set scikit-learn ships

    frame = load_diabetes(as_frame=True).frame.iloc[:120, [0, 2, 3, 8, 10]]
    path = tmp_path / "diabetes.csv"
    frame.to_csv(path, index=False)
    code = main(
        [
            "sweep",
            str(path),
            "--target",
            "target",
            "--feature-counts",
            "1-4",
            "--folds",
            "5",
            "--repeats",
            "2",
            "--save-result",
            str(tmp_path / "d.json"),
            "--quiet",
        ]
    )
    assert code == 0, capsys.readouterr().err
    assert capsys.readouterr().out == ""
    loaded = cx.load_result(tmp_path / "d.json")
    assert list(loaded.curves.index) == [1, 2, 3, 4]
    assert loaded.curves.index.name == "n_features"
    assert loaded.metadata["plan"]["n_splits"] == 5
    assert loaded.metadata["feature_names"] == ["age", "bmi", "bp", "s5"]


def test_demo_writes_a_report(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "--resamples", "10", "--no-progress"]) == 0
    out = capsys.readouterr().out
    assert "synthetic" in out and "Recommended degree:" in out
    page = (tmp_path / "complexity-demo-report.html").read_text(encoding="utf-8")
    assert "synthetic" in page and "data:image/png;base64," in page


def test_progress_flag_draws_the_bar(sensor_csv, capsys):
    code = main(
        [
            "sweep",
            str(sensor_csv),
            "--target",
            "offset_kpa",
            "--predictors",
            "temperature_c",
            "--degrees",
            "0-2",
            "--bootstrap",
            "4",
            "--progress",
            "--quiet",
        ]
    )
    assert code == 0
    err = capsys.readouterr().err
    assert "12/12" in err  # 4 resamples x 3 degrees


def _write(path: Path, text: str | bytes) -> Path:
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8")
    return path


GOOD = "x,y\n" + "".join(f"{i},{i * i + (i % 3)}\n" for i in range(12))

BAD_CASES = {
    # name: (file content or None for no file, extra args, expected message fragment, exit code)
    "missing file": (None, [], "no such file", 1),
    "empty file": ("", [], "is empty", 1),
    "ragged rows": ("x,y\n1,2\n3,4,5,6\n5,6\n", [], "not a well-formed CSV", 1),
    "binary file": (b"\xff\xfe\x00\x81\x82\x00\x00", [], "not a text CSV", 1),
    "one column": ("x\n1\n2\n3\n", [], "1 column(s)", 1),
    "missing target": (GOOD, ["--target", "z"], "target column 'z' is not in", 1),
    "missing predictor": (GOOD, ["--predictors", "x,w"], "'w' not in", 1),
    "non-numeric": ("x,y\n1,2\n2,3\nabc,4\n4,5\n5,6\n6,7\n", [], "column 'x'", 1),
    "empty cells": ("x,y\n1,2\n2,\n3,4\n4,5\n5,6\n6,7\n", [], "empty cells", 1),
    "too few rows": ("x,y\n1,2\n2,3\n3,5\n", [], f"at least {MIN_ROWS}", 1),
    "degree too high": (GOOD, ["--degrees", "0-14"], "degrees reach 14", 1),
    "bad degree list": (GOOD, ["--degrees", "zero-two"], "not a list of whole numbers", 2),
    "repeats without folds": (GOOD, ["--repeats", "3"], "--repeats goes with --folds", 1),
    "target as predictor": (GOOD, ["--predictors", "x,y"], "cannot also be a predictor", 1),
    "bad output suffix": (GOOD, ["--report", "out.txt"], "ending in .html", 1),
}


@pytest.mark.parametrize("case", list(BAD_CASES))
def test_bad_input_gives_one_clear_line(case, tmp_path, capsys):
    content, extra, fragment, expected_code = BAD_CASES[case]
    path = tmp_path / "data.csv"
    if content is not None:
        _write(path, content)
    args = ["sweep", str(path), "--bootstrap", "5", "--no-progress"]
    if "--target" not in extra:
        args += ["--target", "y"]
    code = main(args + extra)
    err = capsys.readouterr().err
    line = _one_error_line(err)
    assert code == expected_code
    assert line.startswith("complexity")
    assert "error:" in line
    assert fragment in line, line


def test_non_numeric_line_names_the_value(tmp_path, capsys):
    path = _write(tmp_path / "d.csv", "x,y\n1,2\n2,3\nabc,4\n4,5\n5,6\n6,7\n")
    assert main(["sweep", str(path), "--target", "y"]) == 1
    line = _one_error_line(capsys.readouterr().err)
    assert "data row 3 holds 'abc'" in line


def test_skip_incomplete_leaves_rows_out(tmp_path, capsys):
    path = _write(tmp_path / "d.csv", GOOD + "12,\n,5\n")
    code = main(
        [
            "sweep",
            str(path),
            "--target",
            "y",
            "--degrees",
            "0-2",
            "--bootstrap",
            "5",
            "--skip-incomplete",
            "--save-result",
            str(tmp_path / "r.json"),
        ]
    )
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert "left out 2 row(s)" in captured.err
    assert cx.load_result(tmp_path / "r.json").metadata["n_samples"] == 12


def test_module_entry_point_has_no_traceback(tmp_path):
    # a real process: `python -m complexity`, as a user runs it
    bad = _write(tmp_path / "bad.csv", "x,y\n1,2\n")
    env = dict(
        os.environ, PYTHONPATH=os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    )
    proc = subprocess.run(
        [sys.executable, "-m", "complexity", "sweep", str(bad), "--target", "y"],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
        check=False,
    )
    assert proc.returncode == 1
    line = _one_error_line(proc.stderr)
    assert line.startswith("complexity: error:") and "at least" in line
    assert proc.stdout == ""


def test_no_command_prints_help(capsys):
    assert main([]) == 2
    assert "COMMAND" in capsys.readouterr().err
