"""Engines: fit every capacity of a ladder on every training set of a plan.

Both engines take a :class:`Problem` and a list of :class:`~complexity.plans.Resample`. ``run``
yields one :class:`Outcome` per resample, in resample order, whatever the number of workers;
``run_tallies`` yields one :class:`~complexity.accumulate.Tally` per block of ``block_size(problem)``
consecutive resamples (made where the outcomes are), equal bit for bit to the tallies of ``run``'s
outcomes grouped the same way. No engine ever has to hold all predictions.

- :mod:`complexity.engine.generic`: clone and fit any scikit-learn estimator, through joblib.
- :mod:`complexity.engine.linear`: least-squares ladders (those whose
  :meth:`~complexity.ladders.Ladder.nested_design` is not None), every capacity of every resample
  batched; its numerics in ``_batched``, its fit on all the data in
  :mod:`complexity.engine.full_fit`.
- ``_dispatch``: the one joblib loop both engines use, and the single-threaded BLAS setting.
"""

from __future__ import annotations

from .._contract import Engine, FullFit, Outcome, Problem

__all__ = ["Engine", "FullFit", "Outcome", "Problem"]
