"""``python -m complexity``: the command line (see :mod:`complexity.cli`)."""

from .cli import main

if __name__ == "__main__":
    raise SystemExit(main())
