"""Command line: the CSV sweep end to end, the demo, and one clear line for each bad input."""

from __future__ import annotations

import os
import shlex
import subprocess
import sys
import warnings
from pathlib import Path
from typing import Any

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
    "only an index": (",y\n" + "".join(f"{i},{i % 4}\n" for i in range(8)), [], "row index", 1),
    "bad decimal mark": (GOOD, ["--decimal", ";"], "invalid choice: ';'", 2),
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


# --------------------------------------------------------------------------------------------
# files as other tools write them: a saved index, decimal commas, tabs (issue 12 item 5)
# --------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def diabetes_frame() -> pd.DataFrame:
    from sklearn.datasets import load_diabetes  # a data set scikit-learn ships

    return load_diabetes(as_frame=True).frame.iloc[:150, [0, 2, 3, 8, 10]]


def _sweep_saved(capsys: Any, path: Path, tmp_path: Path, *extra: str) -> tuple[Any, ...]:
    """Run ``complexity sweep`` on ``path`` (5-fold, seed 0): code, stdout, stderr, result."""
    capsys.readouterr()  # only this run's output
    saved = tmp_path / f"{path.stem}-result.json"
    args = ["sweep", str(path), "--target", "target", "--folds", "5", "--no-progress"]
    code = main([*args, *extra, "--save-result", str(saved)])
    captured = capsys.readouterr()
    return code, captured.out, captured.err, (cx.load_result(saved) if code == 0 else None)


@pytest.fixture(scope="module")
def plain_result(diabetes_frame, tmp_path_factory) -> cx.SweepResult:
    """The reference: the same rows written by pandas with no index, ',' and '.'."""
    folder = tmp_path_factory.mktemp("plain")
    path = folder / "plain.csv"
    diabetes_frame.to_csv(path, index=False)
    saved = folder / "plain.json"
    args = ["sweep", str(path), "--target", "target", "--folds", "5", "--no-progress", "--quiet"]
    assert main([*args, "--save-result", str(saved)]) == 0
    return cx.load_result(saved)


def _same_sweep(result: cx.SweepResult, reference: cx.SweepResult) -> None:
    assert result.metadata["feature_names"] == reference.metadata["feature_names"]
    assert result.recommended == reference.recommended
    # the numbers read from the file are the same doubles, so the curves agree to rounding
    pd.testing.assert_frame_equal(result.curves, reference.curves, check_exact=False, rtol=1e-12)


def test_index_saved_by_pandas_is_left_out_with_a_note(
    diabetes_frame, plain_result, tmp_path, capsys
):
    path = tmp_path / "with-index.csv"
    diabetes_frame.to_csv(path)  # pandas' default writes the index first, under an empty header
    assert path.read_text(encoding="utf-8").startswith(",age,")
    code, out, err, result = _sweep_saved(capsys, path, tmp_path)
    assert code == 0, err
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("complexity: note: left out the first column")
    assert "'Unnamed: 0'" in lines[0] and "row numbers 0..149" in lines[0]
    assert "--keep-index-column" in lines[0]
    assert "Unnamed" not in out
    assert "Unnamed: 0" not in result.metadata["feature_names"]
    _same_sweep(result, plain_result)


def test_keep_index_column_makes_it_a_predictor(diabetes_frame, tmp_path, capsys):
    path = tmp_path / "with-index.csv"
    diabetes_frame.to_csv(path)
    code, _, err, result = _sweep_saved(capsys, path, tmp_path, "--keep-index-column")
    assert code == 0, err
    assert "kept the first column 'Unnamed: 0'" in err
    assert result.metadata["feature_names"] == ["Unnamed: 0", "age", "bmi", "bp", "s5"]


def test_index_of_a_filtered_frame_is_left_out(diabetes_frame, plain_result, tmp_path, capsys):
    # a frame filtered before saving keeps its row labels (here 0, 2, 4, ...), not 0..n-1
    spread = diabetes_frame.set_axis(np.arange(0, 2 * len(diabetes_frame), 2))
    path = tmp_path / "filtered.csv"
    spread.to_csv(path)
    code, _, err, result = _sweep_saved(capsys, path, tmp_path)
    assert code == 0, err
    assert "'Unnamed: 0': it has no header and holds a different label on every row" in err
    _same_sweep(result, plain_result)


def test_a_named_first_column_is_a_predictor(diabetes_frame, tmp_path, capsys):
    # a named column counting 1..n may be a real trend (run number, day): it is not left out
    frame = diabetes_frame.copy()
    frame.insert(0, "day", np.arange(1, len(frame) + 1))
    path = tmp_path / "days.csv"
    frame.to_csv(path, index=False)
    code, _, err, result = _sweep_saved(capsys, path, tmp_path)
    assert code == 0, err
    assert err == ""
    assert result.metadata["feature_names"][0] == "day"


def test_index_named_in_predictors_is_used_as_asked(diabetes_frame, tmp_path, capsys):
    path = tmp_path / "with-index.csv"
    diabetes_frame.to_csv(path)
    code, _, err, result = _sweep_saved(capsys, path, tmp_path, "--predictors", "bmi,Unnamed: 0")
    assert code == 0, err
    assert err == ""
    assert result.metadata["feature_names"] == ["bmi", "Unnamed: 0"]


def test_decimal_commas_are_named_then_read(diabetes_frame, plain_result, tmp_path, capsys):
    path = tmp_path / "decimal-comma.csv"
    diabetes_frame.to_csv(path, sep=";", decimal=",", index=False)
    assert "0,0380759" in path.read_text(encoding="utf-8")
    code, out, err, _ = _sweep_saved(capsys, path, tmp_path, "--separator", ";")
    line = _one_error_line(err)
    assert code == 1 and out == ""
    assert "column 'age'" in line and "data row 1 holds '0,038075906433423026'" in line
    assert "--decimal ','" in line and "as 0.038075906433423026" in line
    code, _, err, result = _sweep_saved(
        capsys, path, tmp_path, "--separator", ";", "--decimal", ","
    )
    assert code == 0, err
    assert err == ""
    _same_sweep(result, plain_result)


def test_semicolon_file_read_with_commas_suggests_the_separator(diabetes_frame, tmp_path, capsys):
    path = tmp_path / "decimal-comma.csv"
    diabetes_frame.to_csv(path, sep=";", decimal=",", index=False)
    code, _, err, _ = _sweep_saved(capsys, path, tmp_path)
    line = _one_error_line(err)
    assert code == 1 and "try --separator ';'" in line


def test_decimal_point_with_decimal_comma_option_is_named(tmp_path, capsys):
    path = _write(tmp_path / "d.csv", "x;y\n" + "".join(f"{i}.5;{i}\n" for i in range(8)))
    assert main(["sweep", str(path), "--target", "y", "--separator", ";", "--decimal", ","]) == 1
    line = _one_error_line(capsys.readouterr().err)
    assert "holds '0.5'" in line and "a decimal point, but --decimal is ','" in line


def test_decimal_mark_equal_to_separator_is_refused(tmp_path, capsys):
    path = _write(tmp_path / "d.csv", GOOD)
    assert main(["sweep", str(path), "--target", "y", "--decimal", ","]) == 1
    line = _one_error_line(capsys.readouterr().err)
    assert "--decimal ',' is also the field separator" in line


def test_backslash_t_separator_reads_a_tab_file_without_warnings(
    diabetes_frame, plain_result, tmp_path, capsys
):
    path = tmp_path / "tabs.tsv"
    diabetes_frame.to_csv(path, sep="\t", index=False)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        # the two characters backslash and t, as `--separator '\t'` arrives from a shell
        code, out, err, result = _sweep_saved(capsys, path, tmp_path, "--separator", "\\t")
    assert code == 0, err
    assert err == "" and "Recommended" in out
    assert [str(w.message) for w in caught if issubclass(w.category, pd.errors.ParserWarning)] == []
    _same_sweep(result, plain_result)


def test_backslash_t_from_a_shell_leaks_no_parser_warning(diabetes_frame, tmp_path, capsys):
    # a real process, with every warning shown: nothing but the summary comes out
    path = tmp_path / "tabs.tsv"
    diabetes_frame.to_csv(path, sep="\t", index=False)
    env = dict(
        os.environ, PYTHONPATH=os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    )
    command = f"{shlex.quote(sys.executable)} -W always -m complexity sweep {path} "
    command += "--target target --folds 5 --separator '\\t'"
    proc = subprocess.run(
        command, shell=True, capture_output=True, text=True, env=env, timeout=120, check=False
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""
    assert "Recommended" in proc.stdout


def test_bands_file_equals_the_statsmodels_bands(tmp_path):
    import statsmodels.api as sm

    # synthetic calibration data; the chosen degree is read back from the file's first line
    rng = np.random.default_rng(7)
    load = np.repeat(np.linspace(0.0, 10.0, 11), 3)
    reading = 2.0 + 0.5 * load + 0.01 * load**2 + rng.normal(0, 0.05, load.size)
    data = tmp_path / "cal.csv"
    pd.DataFrame({"load": load, "reading": reading}).to_csv(data, index=False)
    out = tmp_path / "bands.csv"
    code = main(
        [
            "sweep",
            str(data),
            "--target",
            "reading",
            "--degrees",
            "0-4",
            "--bands",
            str(out),
            "--quiet",
        ]
    )
    assert code == 0
    first = out.read_text(encoding="utf-8").splitlines()[0]
    assert "no extrapolation" in first and "reference standards" in first
    degree = int(first.split()[2].rstrip(","))
    table = pd.read_csv(out, comment="#")
    # reference library: statsmodels OLS on the raw power design (well conditioned on 0..10 at
    # these degrees), get_prediction().summary_frame() at the same points
    powers = lambda x: np.vander(x, degree + 1, increasing=True)  # noqa: E731
    fit = sm.OLS(reading, powers(load)).fit()
    ref = fit.get_prediction(powers(table["load"].to_numpy())).summary_frame(alpha=0.05)
    np.testing.assert_allclose(table["estimate"], ref["mean"], rtol=1e-10)
    np.testing.assert_allclose(table["confidence_lower"], ref["mean_ci_lower"], rtol=1e-10)
    np.testing.assert_allclose(table["prediction_upper"], ref["obs_ci_upper"], rtol=1e-10)
    assert table["load"].min() == 0.0 and table["load"].max() == 10.0  # the measured range only


def test_bands_needs_a_polynomial_sweep(tmp_path, capsys):
    data = tmp_path / "two.csv"
    rng = np.random.default_rng(0)
    pd.DataFrame(rng.normal(size=(30, 3)), columns=["a", "b", "y"]).to_csv(data, index=False)
    code = main(["sweep", str(data), "--target", "y", "--bands", str(tmp_path / "b.csv")])
    assert code != 0
    assert "--bands needs a polynomial sweep" in capsys.readouterr().err


def test_plan_design_reports_the_variance_profile_of_each_design(tmp_path, capsys):
    rng = np.random.default_rng(7)  # synthetic calibration data
    load = np.repeat(np.linspace(0.0, 10.0, 11), 3)
    reading = 2.0 + 0.5 * load + 0.01 * load**2 + rng.normal(0, 0.05, load.size)
    data = tmp_path / "cal.csv"
    pd.DataFrame({"load": load, "reading": reading}).to_csv(data, index=False)
    saved = tmp_path / "r.json"
    args = ["sweep", str(data), "--target", "reading", "--degrees", "0-4", "--seed", "1"]
    plan = ["--plan-design", "6x2", "--plan-design", "11x3", "--plan-target", "0.02"]
    assert main([*args, *plan, "--save-result", str(saved)]) == 0
    out = capsys.readouterr().out
    result = cx.load_result(saved)
    degree, sigma2 = int(result.recommended), result.noise.value
    # published formula: Var(fitted curve at x0) = sigma² x0'(X'X)^-1 x0 for a design X
    # (Draper & Smith ch. 3), computed here on the raw power design over 201 points of [0, 10]
    grid = np.vander(np.linspace(0.0, 10.0, 201), degree + 1, increasing=True)
    for k, r in ((6, 2), (11, 3)):
        design = np.vander(np.repeat(np.linspace(0.0, 10.0, k), r), degree + 1, increasing=True)
        var = sigma2 * np.einsum("ij,jk,ik->i", grid, np.linalg.inv(design.T @ design), grid)
        line = next(row for row in out.splitlines() if row.startswith(f"{k}x{r} "))
        assert f"{np.sqrt(var.max()):.4g}" in line.split()
    assert "Smallest design meeting" in out and "no extrapolation" in out


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--plan-design", "9x2"], "--plan-design and --plan-target go together"),
        (["--plan-design", "nine", "--plan-target", "0.1"], "expected SET_POINTSxREPLICATES"),
        (["--plan-design", "9x2", "--plan-target", "-1"], "expected a standard error > 0"),
    ],
)
def test_plan_design_bad_input(tmp_path, capsys, extra, message):
    data = tmp_path / "cal.csv"
    x = np.linspace(0.0, 10.0, 20)
    pd.DataFrame({"load": x, "reading": 1 + x}).to_csv(data, index=False)
    code = main(["sweep", str(data), "--target", "reading", "--degrees", "0-2", *extra])
    assert code != 0
    assert message in capsys.readouterr().err
