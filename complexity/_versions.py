"""The installed versions of the packages a result depends on, looked up once per process."""

from __future__ import annotations

import functools
import platform
from importlib import metadata as _md

__all__ = ["RESULT_PACKAGES", "installed_versions", "package_version"]

#: The packages whose versions a sweep records (and a checkpoint's fingerprint compares).
RESULT_PACKAGES = ("complexity", "numpy", "scipy", "scikit-learn", "pandas", "joblib")


@functools.cache
def package_version(name: str, missing: str = "unknown") -> str:
    """The installed version of ``name``, or ``missing`` where it is not installed.

    Examples
    --------
    >>> package_version("numpy") != "unknown"
    True
    >>> package_version("no-such-package-here", missing="not installed")
    'not installed'
    """
    try:
        return _md.version(name)
    except _md.PackageNotFoundError:
        return missing


def installed_versions(
    packages: tuple[str, ...] = RESULT_PACKAGES, *, python: bool = True
) -> dict[str, str]:
    """Python's version (unless ``python=False``) and each package's, as a new dict.

    Examples
    --------
    >>> versions = installed_versions(("numpy",))
    >>> sorted(versions)
    ['numpy', 'python']
    >>> sorted(installed_versions(("numpy",), python=False))
    ['numpy']
    """
    out = {"python": platform.python_version()} if python else {}
    out.update((pkg, package_version(pkg)) for pkg in packages)
    return out
