"""The command line: ``complexity demo`` and ``complexity sweep FILE.csv``.

Run ``complexity --help`` (or ``python -m complexity --help``) for the commands, and
``complexity sweep --help`` for the options of a sweep. Bad input ends with one line on stderr
(``complexity: error: ...``) and a non-zero exit code: 1 for a problem with the data or the
sweep, 2 for a problem with the options.
"""

from __future__ import annotations

import argparse
import re
import shlex
import sys
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, NoReturn

from ._cli_calibration import parse_design, plan_designs, write_bands
from ._csv_input import MIN_ROWS, one_line, read_table, select_data, separator_char
from .exceptions import InputError, SweepFailedError

if TYPE_CHECKING:
    from .ladders import Ladder

__all__ = ["MIN_ROWS", "main"]

_VIEWS = ("errors", "parts", "fits", "stability", "conditioning")
_RULES = ("one-se", "min", "loocv", "gcv", "aic", "aicc", "bic", "cp")


class _Parser(argparse.ArgumentParser):
    """argparse, but a usage error is one line on stderr (and exit code 2)."""

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: error: {message} (see '{self.prog} --help')\n")


# --------------------------------------------------------------------------------------------
# option parsing helpers
# --------------------------------------------------------------------------------------------


def _whole_numbers(text: str) -> list[int]:
    """Parse ``"0-10"``, ``"0:10"``, ``"1,2,4"`` or ``"0-3,6,8"`` into a list of whole numbers."""
    values: list[int] = []
    for part in text.replace(" ", "").split(","):
        match = re.fullmatch(r"(\d+)(?:(?:-|:|\.\.)(\d+))?", part)
        if not match:
            raise argparse.ArgumentTypeError(
                f"{text!r} is not a list of whole numbers such as 0-10, 1,2,4 or 0-3,6"
            )
        low = int(match.group(1))
        high = int(match.group(2)) if match.group(2) is not None else low
        if high < low:
            raise argparse.ArgumentTypeError(
                f"{part!r} runs backwards; write the smaller number first"
            )
        values.extend(range(low, high + 1))
    return sorted(set(values))


def _whole_number(text: str, minimum: int, bound: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < minimum:
        raise argparse.ArgumentTypeError(f"{text!r} must be {bound}")
    return value


def _count(text: str) -> int:
    return _whole_number(text, 1, "at least 1")


def _seed(text: str) -> int:
    return _whole_number(text, 0, "0 or more")


def _noise(text: str) -> Any:
    if text in ("auto", "replicates", "differences", "neighbours"):
        return text
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r} is neither a method (auto, replicates, differences, neighbours) nor a "
            "number (the noise variance)"
        ) from None
    if not value >= 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r}: a noise variance must be finite and >= 0")
    return value


def _column_list(text: str) -> list[str]:
    names = [n.strip() for n in text.split(",")]
    if not all(names):
        raise argparse.ArgumentTypeError(f"{text!r} has an empty column name")
    return names


# --------------------------------------------------------------------------------------------
# commands
# --------------------------------------------------------------------------------------------


def _check_output(path: Path | None, option: str, suffixes: tuple[str, ...]) -> None:
    if path is None:
        return
    if path.suffix.lower() not in suffixes:
        raise InputError(f"{option} {path}: expected a file name ending in {' or '.join(suffixes)}")
    if not path.parent.exists():
        raise InputError(f"{option} {path}: the folder {path.parent} does not exist")


def _progress_wanted(flag: bool | None) -> bool:
    if flag is not None:
        return bool(flag)
    try:
        return bool(sys.stderr.isatty())
    except (AttributeError, ValueError):
        return False


def _run_sweep(ladder: Any, X: Any, y: Any, **options: Any) -> Any:
    import complexity as cx

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the summary and the report list every note
        return cx.sweep(ladder, X, y, **options)


def _write_outputs(
    result: Any, args: argparse.Namespace, X: Any, y: Any, command: str
) -> list[str]:
    written = []
    units = {"x_units": args.predictor_units, "y_units": args.target_units}
    if args.save_result is not None:
        result.save(args.save_result)
        written.append(f"result (JSON): {args.save_result}")
    if args.curves_csv is not None:
        table = result.curves.copy()
        table["share_chosen"] = result.stability.reindex(result.curves.index).to_numpy()
        table.to_csv(args.curves_csv)
        written.append(f"curves (CSV): {args.curves_csv}")
    if args.bands is not None:
        write_bands(result, X, y, args.bands)
        written.append(f"bands of the chosen fit (CSV): {args.bands}")
    if args.png is not None:
        from .plot import plot

        view = args.png_view
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fig = plot(
                result,
                view,
                X=X if view == "fits" else None,
                y=y if view == "fits" else None,
                **units,
            )
            fig.savefig(args.png, dpi=150, metadata={"Software": None})
        written.append(f"figure ({view}, PNG): {args.png}")
    if args.report is not None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result.report(args.report, X=X, y=y, command=command, **units)
        written.append(f"report (HTML): {args.report}")
    return written


def _demo(args: argparse.Namespace, command: str) -> int:
    import complexity as cx

    _check_output(args.report, "--report", (".html", ".htm"))
    X, y = cx.datasets.pressure_sensor()
    if not args.quiet:
        print(
            "Demo (synthetic data): zero offset of a pressure sensor read 3 times at each of 17\n"
            "chamber temperatures from -20 to 60 degC. Which polynomial degree in temperature\n"
            "should the offset compensation use?\n",
            flush=True,
        )
    result = _run_sweep(
        cx.PolynomialLadder(degrees=range(0, 11)),
        X,
        y,
        plan=cx.Bootstrap(args.resamples),
        random_state=args.seed,
        n_jobs=args.jobs,
        progress=_progress_wanted(args.progress),
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result.report(
            args.report,
            X=X,
            y=y,
            x_units="°C",
            y_units="kPa",
            command=command,
            title="Demo (synthetic data): which degree for the sensor's offset compensation?",
        )
    if not args.quiet:
        print(result.summary())
        print(f"\nwrote report (HTML): {args.report}")
    return 0


def _sweep_csv(args: argparse.Namespace, command: str) -> int:
    import complexity as cx

    _check_output(args.report, "--report", (".html", ".htm"))
    _check_output(args.save_result, "--save-result", (".json",))
    _check_output(args.curves_csv, "--curves-csv", (".csv",))
    _check_output(args.png, "--png", (".png",))
    _check_output(args.bands, "--bands", (".csv",))
    if bool(args.plan_design) != (args.plan_target is not None):
        raise InputError("--plan-design and --plan-target go together; give both or neither")
    if args.plan_target is not None and not args.plan_target > 0:
        raise InputError(f"--plan-target {args.plan_target}: expected a standard error > 0")
    if args.repeats is not None and args.folds is None:
        raise InputError("--repeats goes with --folds (repeated K-fold); drop it or add --folds K")

    frame = read_table(args.csv, args.separator, args.decimal)
    chosen = select_data(
        frame,
        args.csv,
        args.target,
        args.predictors,
        args.skip_incomplete,
        decimal=args.decimal,
        keep_index=args.keep_index_column,
    )
    X, y = chosen.X, chosen.y
    if not args.quiet:
        for note in chosen.notes:
            print(f"complexity: note: {note}", file=sys.stderr)
    if args.png is not None and args.png_view == "fits" and X.shape[1] != 1:
        raise InputError(f"--png-view fits draws one predictor; {X.shape[1]} are chosen")

    ladder: Ladder
    if args.degrees is not None:
        ladder = cx.PolynomialLadder(degrees=args.degrees)
    elif args.feature_counts is not None:
        order = None if args.order == "given" else args.order
        ladder = cx.FeatureLadder(counts=args.feature_counts, order=order)
    elif X.shape[1] == 1:
        distinct = int(X.iloc[:, 0].nunique())
        top = max(1, min(10, distinct - 2))
        ladder = cx.PolynomialLadder(degrees=range(0, top + 1))
    else:
        order = None if args.order == "given" else args.order
        ladder = cx.FeatureLadder(counts=range(1, X.shape[1] + 1), order=order)

    if args.folds is not None:
        plan: Any = cx.CrossValidation(n_splits=args.folds, n_repeats=args.repeats or 1)
    elif args.bootstrap is not None:
        plan = cx.Bootstrap(args.bootstrap)
    else:
        plan = None  # the library's default plan (repeated 10-fold cross-validation)

    result = _run_sweep(
        ladder,
        X,
        y,
        plan=plan,
        noise=args.noise,
        rule=args.rule,
        random_state=args.seed,
        n_jobs=args.jobs,
        progress=_progress_wanted(args.progress),
    )
    written = _write_outputs(result, args, X, y, command)
    planning = (
        plan_designs(result, X, y, args.plan_design, args.plan_target) if args.plan_design else None
    )
    if not args.quiet:
        print(result.summary())
        if planning:
            print("\n" + planning)
        if written:
            print()
        for line in written:
            print(f"wrote {line}")
        if args.report is None:
            print("\n(add --report FILE.html for the figures and the full report)")
    return 0


# --------------------------------------------------------------------------------------------
# the parser
# --------------------------------------------------------------------------------------------


def _add_common(command: argparse.ArgumentParser) -> None:
    parser = command.add_argument_group("running")
    parser.add_argument(
        "--seed",
        type=_seed,
        default=0,
        metavar="INT",
        help="random seed; the same seed gives the same result (default 0)",
    )
    parser.add_argument(
        "--jobs",
        type=int,
        default=None,
        metavar="N",
        help="parallel workers for the fits (default: one; -1: every core)",
    )
    parser.add_argument(
        "--progress",
        action=argparse.BooleanOptionalAction,
        default=None,
        help="show a bar counting fits on stderr (default: on when stderr is a terminal)",
    )
    parser.add_argument(
        "--quiet", action="store_true", help="print nothing on stdout (files are still written)"
    )


def _parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="complexity",
        description="How much model capacity does your data support? Sweep a capacity knob\n"
        "(polynomial degree or number of predictors) over resampled training sets and get\n"
        "a recommendation with its reasons, figures and a report.",
        epilog="Examples:\n"
        "  complexity demo --report demo.html\n"
        "  complexity sweep readings.csv --target offset --predictors temperature \\\n"
        "      --degrees 0-8 --bootstrap 200 --report readings.html --save-result readings.json\n"
        "  complexity sweep plant.csv --target yield --feature-counts 1-6 --folds 10 --repeats 5",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    demo = sub.add_parser(
        "demo",
        help="the whole job on the bundled synthetic pressure-sensor data, with a report",
        description="Choose a polynomial degree for the bundled synthetic pressure-sensor data "
        "(zero offset against temperature), print the summary and write an HTML report.",
    )
    demo.add_argument(
        "--resamples",
        type=_count,
        default=200,
        metavar="N",
        help="bootstrap resamples (default 200)",
    )
    demo.add_argument(
        "--report",
        type=Path,
        default=Path("complexity-demo-report.html"),
        metavar="FILE.html",
        help="where to write the report (default complexity-demo-report.html)",
    )
    _add_common(demo)
    demo.set_defaults(handler=_demo)

    sw = sub.add_parser(
        "sweep",
        help="sweep a CSV file: pick the columns, the ladder, the resampling plan, the outputs",
        description="Read a CSV file with a header row, sweep model capacity for predicting the "
        "target column from the predictor columns, print the summary and write the outputs asked "
        "for. With one predictor the default ladder is polynomial degrees 0 to 10 (fewer for few "
        "distinct values); with several, the number of predictors used, in the order given.",
    )
    sw.add_argument("csv", type=Path, metavar="FILE.csv", help="the data, one row per observation")
    data = sw.add_argument_group("data")
    data.add_argument(
        "--target", required=True, metavar="COLUMN", help="the column to predict (the response)"
    )
    data.add_argument(
        "--predictors",
        type=_column_list,
        default=None,
        metavar="COL[,COL...]",
        help="the predictor columns, in the order they should enter (default: every other "
        "column, less a saved row index; see --keep-index-column)",
    )
    data.add_argument(
        "--separator",
        type=separator_char,
        default=",",
        metavar="CHAR",
        help="the field separator of the file, e.g. ';' or '\\t' for a tab (default ',')",
    )
    data.add_argument(
        "--decimal",
        choices=(".", ","),
        default=".",
        metavar="MARK",
        help="the decimal mark of the numbers, '.' or ',': ',' reads 1,5 as 1.5 (then the "
        "fields need another separator, e.g. --separator ';'; default '.')",
    )
    data.add_argument(
        "--keep-index-column",
        action="store_true",
        help="with the default predictors, keep a first column without a header that holds "
        "one label per row (a saved row index, left out by default with a note)",
    )
    data.add_argument(
        "--skip-incomplete",
        action="store_true",
        help="leave out rows with empty cells in the chosen columns instead of stopping",
    )
    data.add_argument(
        "--target-units",
        default=None,
        metavar="UNITS",
        help="units of the target, for figure labels, e.g. kPa",
    )
    data.add_argument(
        "--predictor-units",
        default=None,
        metavar="UNITS",
        help="units of the (single) predictor, for figure labels, e.g. degC",
    )

    ladder = sw.add_argument_group("capacity ladder (choose one)")
    which = ladder.add_mutually_exclusive_group()
    which.add_argument(
        "--degrees",
        type=_whole_numbers,
        default=None,
        metavar="LIST",
        help="polynomial degrees to try, e.g. 0-10 or 0,1,2,4",
    )
    which.add_argument(
        "--feature-counts",
        type=_whole_numbers,
        default=None,
        metavar="LIST",
        help="numbers of predictors to try, e.g. 1-8 (least squares on the first k)",
    )
    ladder.add_argument(
        "--order",
        choices=("given", "correlation", "f-test"),
        default="given",
        help="for feature counts: the order predictors enter; 'correlation' and "
        "'f-test' rank them inside every training set (default given)",
    )

    plan = sw.add_argument_group("resampling plan (choose one)")
    kind = plan.add_mutually_exclusive_group()
    kind.add_argument(
        "--bootstrap",
        type=_count,
        default=None,
        metavar="N",
        help="bootstrap resamples, scored out of bag, instead of the default plan",
    )
    kind.add_argument(
        "--folds",
        type=_count,
        default=None,
        metavar="K",
        help="K-fold cross-validation (default plan: 10 folds, 10 repeats)",
    )
    plan.add_argument(
        "--repeats",
        type=_count,
        default=None,
        metavar="R",
        help="repeat K-fold R times with new folds (with --folds; default 1)",
    )

    choice = sw.add_argument_group("choice")
    choice.add_argument(
        "--rule",
        choices=_RULES,
        default="one-se",
        help="how the capacity is picked: one-se = simplest within one standard "
        "error of the lowest test error; min = lowest test error; the others are "
        "closed-form criteria for least squares (default one-se)",
    )
    choice.add_argument(
        "--noise",
        type=_noise,
        default="auto",
        metavar="METHOD|VARIANCE",
        help="how the noise variance is estimated (auto, replicates, differences, "
        "neighbours) or its value (default auto)",
    )

    out = sw.add_argument_group("outputs")
    out.add_argument(
        "--report",
        type=Path,
        default=None,
        metavar="FILE.html",
        help="a self-contained HTML report with figures",
    )
    out.add_argument(
        "--save-result",
        type=Path,
        default=None,
        metavar="FILE.json",
        help="the whole result as JSON (read back with complexity.load_result)",
    )
    out.add_argument(
        "--curves-csv", type=Path, default=None, metavar="FILE.csv", help="the curves table as CSV"
    )
    out.add_argument(
        "--bands",
        type=Path,
        default=None,
        metavar="FILE.csv",
        help="the chosen polynomial across the measured range with 95%% confidence and "
        "prediction bands (one predictor, --degrees)",
    )
    out.add_argument(
        "--plan-design",
        type=parse_design,
        action="append",
        default=[],
        metavar="POINTSxREPEATS",
        help="a proposed next measurement, e.g. 9x2 (9 set points across the range, 2 readings "
        "each); repeat the option to compare designs (with --plan-target)",
    )
    out.add_argument(
        "--plan-target",
        type=float,
        default=None,
        metavar="SE",
        help="the largest acceptable standard error of the fitted curve in the range (y units)",
    )
    out.add_argument("--png", type=Path, default=None, metavar="FILE.png", help="one figure as PNG")
    out.add_argument(
        "--png-view",
        choices=_VIEWS,
        default="errors",
        help="which figure --png draws (default errors)",
    )
    _add_common(sw)
    sw.set_defaults(handler=_sweep_csv)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``complexity`` command; returns the exit code.

    Parameters
    ----------
    argv : sequence of str, optional
        The arguments after the program name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 1 for a problem with the data or the sweep, 2 for a problem with the
        options (argparse's convention).

    Examples
    --------
    >>> from complexity.cli import main
    >>> main(["sweep", "no-such-file.csv", "--target", "y"])
    1
    """

    argv = list(sys.argv[1:] if argv is None else argv)
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help (0) or a usage error (2, already explained on stderr)
        return int(exc.code or 0)
    if not getattr(args, "handler", None):
        parser.print_help(sys.stderr)
        return 2
    command = "complexity " + shlex.join(argv)
    try:
        return int(args.handler(args, command))
    except InputError as exc:
        message = one_line(str(exc))
    except ImportError as exc:
        message = one_line(str(exc))
    except (ValueError, TypeError, OSError, SweepFailedError) as exc:
        # what the library raises for bad data (each message names the problem and the fix)
        message = one_line(str(exc) or type(exc).__name__)
    except KeyboardInterrupt:
        print("\ncomplexity: interrupted", file=sys.stderr)
        return 130
    print(f"complexity: error: {message}", file=sys.stderr)
    return 1
