"""complexity: how much model capacity does one data set support?

Sweep a capacity knob (polynomial degree, number of predictors, any estimator parameter) over
resampled training sets, estimate training error, test error, squared bias, variance and noise,
and recommend a capacity with a named rule and its stability.

Examples
--------
>>> import complexity as cx
>>> X, y = cx.datasets.pressure_sensor()
>>> result = cx.sweep(cx.PolynomialLadder(degrees=range(0, 8)), X, y,
...                   plan=cx.Bootstrap(50), random_state=0)
>>> result.recommended in range(0, 8)
True
"""

from importlib.metadata import PackageNotFoundError, version

from . import datasets
from .exceptions import (
    CapacityWarning,
    CheckpointMismatchError,
    ExtrapolationWarning,
    SweepFailedError,
)
from .ladders import FeatureLadder, Ladder, ParamLadder, PolynomialLadder
from .noise import NoiseEstimate, estimate_noise
from .plans import Bootstrap, CrossValidation, Plan, Simulation
from .result import SweepResult, load_result
from .selector import ComplexitySelector
from .sweep import sweep

try:
    __version__ = version("complexity")
except PackageNotFoundError:  # running from a source tree without installing
    __version__ = "0.0.0+unknown"

__all__ = [
    "Bootstrap",
    "CapacityWarning",
    "CheckpointMismatchError",
    "ComplexitySelector",
    "CrossValidation",
    "ExtrapolationWarning",
    "FeatureLadder",
    "Ladder",
    "NoiseEstimate",
    "ParamLadder",
    "Plan",
    "PolynomialLadder",
    "Simulation",
    "SweepFailedError",
    "SweepResult",
    "__version__",
    "datasets",
    "estimate_noise",
    "load_result",
    "sweep",
]
