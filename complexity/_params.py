"""Parameters of ladders and plans, in scikit-learn's ``get_params`` / ``set_params`` protocol.

Ladders and plans are settings, not estimators, but they sit inside
:class:`~complexity.ComplexitySelector`, so scikit-learn's tools must be able to read, copy and
change them: :func:`sklearn.base.clone`, nested names such as ``ladder__degrees`` and
:class:`~sklearn.model_selection.GridSearchCV`. :class:`ParamsMixin` gives them that protocol,
built on the parameters of each class's ``__init__`` (which it stores under the same names).

Unlike :class:`sklearn.base.BaseEstimator`, a new value goes through ``__init__`` again, so
``set_params`` refuses what the constructor refuses, with the same message, and settings derived
in ``__init__`` (a sorted ladder, a flag) follow. A refused value leaves the object unchanged.
The classes keep their own ``__repr__``.
"""

from __future__ import annotations

import copy
import inspect
from typing import Any, TypeVar

__all__ = ["ParamsMixin"]

_Self = TypeVar("_Self", bound="ParamsMixin")

_SKIPPED_KINDS = (inspect.Parameter.VAR_POSITIONAL, inspect.Parameter.VAR_KEYWORD)


def _param_names(cls: type) -> list[str]:
    """The named parameters of ``cls.__init__``, sorted (scikit-learn's convention)."""
    init = cls.__init__  # type: ignore[misc]
    if init is object.__init__:
        return []
    signature = inspect.signature(init)
    return sorted(
        p.name
        for p in signature.parameters.values()
        if p.name != "self" and p.kind not in _SKIPPED_KINDS
    )


def _nested_params(value: Any) -> dict[str, Any]:
    """``value.get_params()`` when ``value`` has parameters of its own (an estimator), else {}."""
    if isinstance(value, type) or not callable(getattr(value, "get_params", None)):
        return {}
    return dict(value.get_params(deep=True))


class ParamsMixin:
    """``get_params``, ``set_params`` and ``clone`` support from the ``__init__`` signature.

    A class using it stores every ``__init__`` argument as an attribute of the same name, in the
    form ``__init__`` accepts back (``type(obj)(**obj.get_params(deep=False))`` rebuilds it).

    Examples
    --------
    >>> import complexity as cx
    >>> ladder = cx.PolynomialLadder(range(0, 4))
    >>> ladder.get_params()
    {'degrees': (0, 1, 2, 3), 'domain': None}
    >>> ladder.set_params(degrees=[0, 2, 1]).degrees
    (0, 1, 2)
    """

    def get_params(self, deep: bool = True) -> dict[str, Any]:
        """The parameters of ``__init__`` and their current values.

        Parameters
        ----------
        deep : bool, default=True
            Also list the parameters of parameters that have their own (an estimator inside a
            ladder), as ``name__parameter``.

        Returns
        -------
        dict
            Parameter name to value.

        Examples
        --------
        >>> import complexity as cx
        >>> cx.Bootstrap(50).get_params()
        {'n_resamples': 50}
        """
        out: dict[str, Any] = {}
        for name in _param_names(type(self)):
            try:
                value = getattr(self, name)
            except AttributeError:
                raise AttributeError(
                    f"{type(self).__name__} does not store its __init__ parameter {name!r} "
                    "under that name, so its parameters cannot be read."
                ) from None
            if deep:
                out.update({f"{name}__{k}": v for k, v in _nested_params(value).items()})
            out[name] = value
        return out

    def set_params(self: _Self, **params: Any) -> _Self:
        """Change parameters, checked as ``__init__`` checks them; returns ``self``.

        Own parameters are set by building the object again with the new values (so a refused
        value raises the constructor's error and leaves the object unchanged); nested names
        such as ``estimator__alpha`` are handed to the inner object's ``set_params``.

        Parameters
        ----------
        **params
            Parameter names (as :meth:`get_params` lists them) and their new values.

        Returns
        -------
        self

        Raises
        ------
        ValueError
            A name that is not a parameter (the message lists the accepted ones), or a value
            ``__init__`` refuses.
        TypeError
            A value of a kind ``__init__`` refuses.

        Examples
        --------
        >>> import complexity as cx
        >>> cx.CrossValidation(5).set_params(n_splits=3, n_repeats=2)
        CrossValidation(n_splits=3, n_repeats=2, shuffle=True)
        >>> cx.Bootstrap().set_params(n_resamples=1)
        Traceback (most recent call last):
        ...
        ValueError: n_resamples must be an int >= 2; got 1.
        """
        if not params:
            return self
        current = self.get_params(deep=False)
        own: dict[str, Any] = {}
        nested: dict[str, dict[str, Any]] = {}
        for key, value in params.items():
            name, split, rest = key.partition("__")
            if name not in current:
                accepted = ", ".join(current) or "none"
                raise ValueError(
                    f"{key!r} is not a parameter of {type(self).__name__}; accepted: {accepted}."
                )
            if split:
                nested.setdefault(name, {})[rest] = value
            else:
                own[name] = value
        for name in nested:
            target = own.get(name, current[name])
            if not callable(getattr(target, "set_params", None)):
                raise ValueError(
                    f"{name!r} of {type(self).__name__} has no parameters of its own; got "
                    f"{', '.join(repr(f'{name}__{k}') for k in nested[name])}."
                )
        if own:
            fresh = type(self)(**{**current, **own})  # validated as the constructor validates
            state = vars(self)
            state.clear()
            state.update(vars(fresh))
        for name, values in nested.items():
            getattr(self, name).set_params(**values)
        return self

    def __sklearn_clone__(self: _Self) -> _Self:
        """A new object with the same parameters (inner estimators cloned, unfitted).

        A subclass that does not store its ``__init__`` parameters under their names is
        deep-copied instead (what :func:`sklearn.base.clone` does for objects without
        parameters).
        """
        from sklearn.base import clone

        try:
            own = self.get_params(deep=False)
        except AttributeError:
            return copy.deepcopy(self)
        return type(self)(**{k: clone(v, safe=False) for k, v in own.items()})
