"""The command line: ``complexity demo`` and friends.

Run ``python -m complexity --help`` for the commands.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from collections.abc import Sequence

__all__ = ["main"]


def _demo(args: argparse.Namespace) -> int:
    import complexity as cx

    X, y = cx.datasets.pressure_sensor()
    print(
        "Demo (synthetic data): zero offset of a pressure sensor read 3 times at each of 17\n"
        "chamber temperatures from -20 to 60 degC. Which polynomial degree in temperature\n"
        "should the offset compensation use?\n"
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the summary lists every note itself
        result = cx.sweep(
            cx.PolynomialLadder(degrees=range(0, 11)),
            X,
            y,
            plan=cx.Bootstrap(args.resamples),
            random_state=args.seed,
        )
    print(result.summary())
    return 0


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="complexity",
        description="How much model capacity does your data support? Sweep a capacity knob over "
        "resampled training sets and get a recommendation with its reasons.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    demo = sub.add_parser("demo", help="run the whole job on the bundled synthetic sensor data")
    demo.add_argument("--resamples", type=int, default=200, help="bootstrap resamples (default 200)")
    demo.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    demo.set_defaults(handler=_demo)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``complexity`` command; returns the exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help(sys.stderr)
        return 2
    return int(args.handler(args))
