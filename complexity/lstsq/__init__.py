"""Least squares on nested designs: the numerical kernel of the exact path.

- :mod:`complexity.lstsq.nested`: one Householder QR serves every capacity of a nested ladder
  (:func:`~complexity.lstsq.nested.nested_least_squares`, :class:`~complexity.lstsq.nested.NestedFit`,
  :func:`~complexity.lstsq.nested.householder`).
- :mod:`complexity.lstsq.design`: how a ladder maps X onto stable columns, which columns each
  capacity uses, and the matrix back to the user's units (:class:`~complexity.lstsq.design.NestedDesign`).
- :mod:`complexity.lstsq.coefficients`: coefficients in the user's units, one route for the
  one-off fits and for ``SweepResult.coefficients``.
- :mod:`complexity.lstsq._rational`: the exact rational arithmetic behind the power basis.

The closed-form criteria (AIC, PRESS, ...) on these fits are in :mod:`complexity.criteria`.
The package imports no submodule itself (import the one you need), so that
:mod:`complexity.basis` can use the rational helpers without an import cycle.
"""
