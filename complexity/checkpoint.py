"""Checkpoints: keep each finished resample on disk so a long sweep can be resumed.

``sweep(..., checkpoint="path/")`` writes every finished resample outcome to its own file in the
folder as soon as the engine hands it over. When a sweep is interrupted (Ctrl-C, a killed job, a
lost machine) and started again with the same arguments, the finished resamples are read back and
only the others are fitted. Outcomes are folded into the accumulators in resample order either
way, so the result is bit-identical to an uninterrupted run.

Layout of the folder (no pickle anywhere; any tool can read it)::

    checkpoint.json          {"format": "complexity.checkpoint", "version": 1,
                              "fingerprint": {...}}  what the stored work was computed from
    resample-000000.npz      one numpy ``.npz`` archive per finished resample: the fields of
    resample-000001.npz      :class:`complexity.engine.Outcome` (arrays; failure messages as a
    ...                      unicode array), readable with ``numpy.load(allow_pickle=False)``

Every file is written to a temporary name first and moved into place with :func:`os.replace`,
so a process killed mid-write leaves no half-written file behind.

The fingerprint records hashes of the data bytes (X, y, weights, groups, evaluation points and
their targets), ``ladder.describe()``, ``plan.describe()``, the seed (entropy and spawn key), the
engine, the library versions and, for scikit-learn splitters, the training sets themselves. A
folder whose fingerprint differs from the current sweep is refused with a message naming what
differs: stored work is never mixed into a different sweep. Settings that do not change a single
fit (``rule``, ``noise``, ``n_jobs``, ``progress``, ``keep_predictions``) may change between runs.

Where ``random_state=None`` and the folder already holds a checkpoint, the stored seed is reused,
so an interrupted run without a seed can still be resumed.
"""

from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import json
import os
import tempfile
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from ._contract import Outcome, Problem
from ._validation import _short_repr, as_seed_sequence
from ._versions import installed_versions
from .exceptions import CheckpointMismatchError
from .plans import Resample

__all__ = ["CheckpointMismatchError", "fingerprint", "resume", "seed_for"]

FORMAT = "complexity.checkpoint"
VERSION = 1
MANIFEST = "checkpoint.json"
_PREFIX, _SUFFIX, _TMP = "resample-", ".npz", ".tmp-"
_FAILURE_KEYS = ("failures__capacity", "failures__message")


# --------------------------------------------------------------------------- path and seed


def check_path(checkpoint: Any) -> Path | None:
    """Return ``checkpoint`` as a :class:`~pathlib.Path` (or None); refuse anything else.

    Examples
    --------
    >>> check_path(None) is None
    True
    >>> check_path("runs/deg-sweep").name
    'deg-sweep'
    """
    if checkpoint is None:
        return None
    if isinstance(checkpoint, bytes) or not isinstance(checkpoint, (str, os.PathLike)):
        raise TypeError(
            "checkpoint must be None or a folder path (str or os.PathLike); "
            f"got {_short_repr(checkpoint)}."
        )
    path = Path(checkpoint)
    if str(checkpoint) == "":
        raise ValueError("checkpoint must be a folder path; got an empty string.")
    if path.exists() and not path.is_dir():
        raise ValueError(
            f"checkpoint={str(checkpoint)!r} is a file; give a folder (new or existing)."
        )
    return path


def _read_manifest(path: Path) -> dict[str, Any] | None:
    file = path / MANIFEST
    if not file.is_file():
        return None
    try:
        manifest = json.loads(file.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise CheckpointMismatchError(
            f"checkpoint {str(path)!r}: {MANIFEST} cannot be read ({exc}); "
            "delete the folder to start over."
        ) from None
    if not isinstance(manifest, dict) or manifest.get("format") != FORMAT:
        raise CheckpointMismatchError(
            f"checkpoint {str(path)!r}: {MANIFEST} is not a complexity checkpoint "
            f"(format {manifest.get('format') if isinstance(manifest, dict) else None!r})."
        )
    if manifest.get("version") != VERSION:
        raise CheckpointMismatchError(
            f"checkpoint {str(path)!r} has format version {manifest.get('version')!r}; "
            f"this library reads version {VERSION}. Delete the folder to start over."
        )
    return manifest


def seed_for(checkpoint: Any, random_state: Any) -> np.random.SeedSequence:
    """The root seed of a sweep: ``random_state``, or the stored seed when resuming without one.

    With ``random_state=None`` and an existing checkpoint folder, the seed recorded in the folder
    is returned, so rerunning the very same call resumes the interrupted sweep.

    Examples
    --------
    >>> int(seed_for(None, 7).entropy)
    7
    """
    path = check_path(checkpoint)
    if random_state is not None or path is None:
        return as_seed_sequence(random_state)
    manifest = _read_manifest(path)
    if manifest is None:
        return as_seed_sequence(None)
    seed = manifest["fingerprint"]["seed"]
    entropy = seed["entropy"]
    entropy = [int(e) for e in entropy] if isinstance(entropy, list) else int(entropy)
    return np.random.SeedSequence(entropy, spawn_key=tuple(int(k) for k in seed["spawn_key"]))


# --------------------------------------------------------------------------- fingerprint


def _hash_array(value: Any) -> str | None:
    if value is None:
        return None
    arr = np.asarray(value)
    digest = hashlib.sha256()
    if arr.dtype.kind in "biufc":
        arr = np.ascontiguousarray(arr)
        digest.update(f"{arr.dtype.str}{arr.shape}".encode())
        digest.update(arr.tobytes())
    else:  # labels such as group names: hash their text
        digest.update(f"text{arr.shape}".encode())
        digest.update(json.dumps([str(v) for v in arr.ravel().tolist()]).encode())
    return digest.hexdigest()


def _hash_training_sets(resamples: Sequence[Resample]) -> str:
    digest = hashlib.sha256()
    for r in resamples:
        for part in (r.train, r.test):
            digest.update(
                b"-" if part is None else np.ascontiguousarray(part, dtype=np.int64).tobytes()
            )
            digest.update(b"|")
    return digest.hexdigest()


def _jsonable(value: Any) -> Any:
    """Normalise through JSON, so a stored and a fresh fingerprint compare like with like."""
    return json.loads(json.dumps(value, default=repr, sort_keys=True))


def fingerprint(problem: Problem, resamples: Sequence[Resample], engine: str) -> dict[str, Any]:
    """What the outcomes of a sweep depend on, as a JSON-friendly dict.

    Parameters
    ----------
    problem : complexity.engine.Problem
    resamples : sequence of Resample
    engine : str
        The engine actually used ("exact" or "generic").

    Returns
    -------
    dict
        Keys ``data`` (SHA-256 of each array's bytes), ``ladder``, ``plan``, ``seed``,
        ``engine``, ``versions``, ``n_resamples``, ``training_sets`` (a hash of the training and
        test rows, for scikit-learn splitters whose description cannot pin them down).

    Examples
    --------
    >>> import numpy as np
    >>> import complexity as cx
    >>> from complexity.engine import Problem
    >>> X, y = np.linspace(0, 1, 8).reshape(-1, 1), np.arange(8.0)
    >>> ladder, plan, root = cx.PolynomialLadder([0, 1]), cx.Bootstrap(4), np.random.SeedSequence(1)
    >>> problem = Problem(ladder, ladder.build(X), X, y, X, y, plan, root, X)
    >>> fp = fingerprint(problem, plan.resamples(8, root), "generic")
    >>> fp["seed"], fp["n_resamples"]
    ({'entropy': '1', 'spawn_key': []}, 4)
    """
    root = problem.root
    raw: Any = root.entropy
    entropy: list[str] | str = [str(e) for e in np.ravel(raw)] if np.ndim(raw) else str(raw)
    data = {
        "X": _hash_array(problem.X),
        "y": _hash_array(problem.y),
        "sample_weight": _hash_array(problem.sample_weight),
        "groups": _hash_array(problem.groups),
    }
    # a simulation scores at its own points against the truth; data plans at X against y
    for key, value, same_as in (
        ("evaluation points", problem.X_eval, problem.X),
        ("targets", problem.target, problem.y),
        ("design", problem.design_X, problem.X),
    ):
        data[key] = None if value is same_as else _hash_array(value)
    splitter = problem.plan.describe().get("kind") == "splitter"
    return _jsonable(
        {
            "data": data,
            "ladder": problem.ladder.describe(),
            "plan": problem.plan.describe(),
            "seed": {"entropy": entropy, "spawn_key": list(root.spawn_key)},
            "engine": engine,
            "versions": installed_versions(
                ("complexity", "numpy", "scipy", "scikit-learn"), python=False
            ),
            "n_resamples": len(resamples),
            "n_capacities": problem.n_capacities,
            "training_sets": _hash_training_sets(resamples) if splitter else None,
        }
    )


def _differences(stored: dict[str, Any], current: dict[str, Any]) -> list[str]:
    out = []
    for key in sorted(set(stored) | set(current)):
        old, new = stored.get(key), current.get(key)
        if old == new:
            continue
        if key == "data" and isinstance(old, dict) and isinstance(new, dict):
            parts = [k for k in sorted(set(old) | set(new)) if old.get(k) != new.get(k)]
            out.append(f"data ({', '.join(parts)}) differ")
        elif key == "training_sets":
            out.append(
                "training_sets differ (the splitter gave other rows: give it a fixed random_state)"
            )
        else:
            out.append(f"{key}: stored {_short_repr(old, 120)}, now {_short_repr(new, 120)}")
    return out


# --------------------------------------------------------------------------- outcome files


def _file(path: Path, index: int) -> Path:
    return path / f"{_PREFIX}{index:06d}{_SUFFIX}"


def _atomic_write(target: Path, write: Callable[[Any], None]) -> None:
    fd, tmp = tempfile.mkstemp(prefix=_TMP, suffix=target.suffix, dir=target.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            write(handle)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _outcome_arrays(outcome: Outcome) -> dict[str, np.ndarray]:
    arrays: dict[str, np.ndarray] = {}
    for f in dataclasses.fields(outcome):
        value = getattr(outcome, f.name)
        if f.name == "failures":
            caps = list(value)
            arrays[_FAILURE_KEYS[0]] = np.array(caps, dtype=np.int64)
            arrays[_FAILURE_KEYS[1]] = np.array([str(value[c]) for c in caps], dtype=np.str_)
        elif isinstance(value, (int, np.integer)):
            arrays[f.name] = np.array(int(value), dtype=np.int64)
        elif isinstance(value, np.ndarray) and value.dtype.kind in "iuf":
            arrays[f.name] = value
        else:  # pragma: no cover - guards a future Outcome field that has no file form yet
            raise TypeError(
                f"checkpoint cannot store Outcome.{f.name} of type {type(value).__name__}."
            )
    return arrays


def _outcome_from(arrays: Any) -> Outcome:
    kwargs: dict[str, Any] = {}
    for f in dataclasses.fields(Outcome):
        if f.name == "failures":
            caps, msgs = arrays[_FAILURE_KEYS[0]], arrays[_FAILURE_KEYS[1]]
            kwargs["failures"] = {int(c): str(m) for c, m in zip(caps.tolist(), msgs.tolist())}
        elif f.name in ("index", "replicate"):
            kwargs[f.name] = int(arrays[f.name])
        elif f.name == "test":
            kwargs[f.name] = arrays[f.name].astype(np.intp)
        else:
            kwargs[f.name] = arrays[f.name]
    return Outcome(**kwargs)


def _readable(file: Path) -> bool:
    """True when ``file`` opens as an archive holding every Outcome field (a cheap check)."""
    needed = {f.name for f in dataclasses.fields(Outcome) if f.name != "failures"}
    needed |= set(_FAILURE_KEYS)
    try:
        with np.load(file, allow_pickle=False) as archive:
            return needed <= set(archive.files)
    except Exception:
        return False


class _Store:
    """One checkpoint folder, opened for a sweep with a known fingerprint."""

    def __init__(self, path: Path, current: dict[str, Any]) -> None:
        self.path = path
        path.mkdir(parents=True, exist_ok=True)
        manifest = _read_manifest(path)
        if manifest is None:
            foreign = [p.name for p in path.iterdir() if not p.name.startswith(_TMP)]
            if foreign:
                raise CheckpointMismatchError(
                    f"checkpoint {str(path)!r} is not empty and holds no {MANIFEST} "
                    f"(found {_short_repr(sorted(foreign)[:5])}); give a new or empty folder."
                )
            body = {"format": FORMAT, "version": VERSION, "fingerprint": current}
            text = json.dumps(body, indent=1, sort_keys=True)
            _atomic_write(path / MANIFEST, lambda h: h.write(text.encode("utf-8")))
        else:
            diffs = _differences(manifest.get("fingerprint", {}), current)
            if diffs:
                raise CheckpointMismatchError(
                    f"checkpoint {str(path)!r} was written by a different sweep, so its results "
                    f"are not used: {'; '.join(diffs)}. Rerun with the original arguments to "
                    "resume, or give a new folder (or delete this one) to start over."
                )
        for leftover in path.glob(f"{_TMP}*"):  # a write cut short by a killed process
            with contextlib.suppress(OSError):
                leftover.unlink()

    def finished(self, n_resamples: int) -> set[int]:
        done = set()
        for file in self.path.glob(f"{_PREFIX}*{_SUFFIX}"):
            stem = file.name[len(_PREFIX) : -len(_SUFFIX)]
            if not stem.isdigit() or int(stem) >= n_resamples:
                continue
            if _readable(file):
                done.add(int(stem))
            else:  # damaged on disk: drop it, the resample is fitted again
                with contextlib.suppress(OSError):
                    file.unlink()
        return done

    def save(self, outcome: Outcome) -> None:
        arrays = _outcome_arrays(outcome)
        _atomic_write(_file(self.path, outcome.index), lambda h: np.savez(h, **arrays))  # type: ignore[arg-type]

    def load(self, r: Resample, n_capacities: int) -> Outcome:
        file = _file(self.path, r.index)
        with np.load(file, allow_pickle=False) as archive:
            outcome = _outcome_from(archive)
        ok = (
            outcome.index == r.index
            and outcome.replicate == r.replicate
            and np.array_equal(outcome.test, r.test)
            and outcome.residuals.shape == (r.test.size, n_capacities)
            and outcome.train_mse.shape == (n_capacities,)
        )
        if not ok:
            raise CheckpointMismatchError(
                f"checkpoint file {str(file)!r} does not match resample {r.index} of this sweep; "
                "delete the folder to start over."
            )
        return outcome


class _Subset(Sequence):
    """The resamples at ``positions`` of ``base``, without copying them."""

    def __init__(self, base: Sequence[Resample], positions: list[int]) -> None:
        self.base, self.positions = base, positions

    def __len__(self) -> int:
        return len(self.positions)

    def __getitem__(self, i: Any) -> Any:
        if isinstance(i, slice):
            return [self.base[p] for p in self.positions[i]]
        return self.base[self.positions[i]]


def resume(
    checkpoint: Any,
    engine: Any,
    engine_name: str,
    problem: Problem,
    resamples: Sequence[Resample],
    *,
    n_jobs: int | None = None,
    on_done: Callable[[int], None] | None = None,
) -> Iterator[Outcome]:
    """Yield every resample's outcome in order: stored ones from disk, the rest from ``engine``.

    Each freshly computed outcome is written to the folder before it is handed on.

    Parameters
    ----------
    checkpoint : str or os.PathLike
        The checkpoint folder (created if missing).
    engine : module
        An engine with ``run(problem, resamples, n_jobs=..., on_done=...)``.
    engine_name : str
        Its name, part of the fingerprint.
    problem : complexity.engine.Problem
    resamples : sequence of Resample
    n_jobs : int, optional
    on_done : callable, optional
        Progress callback, called with a number of fits.

    Raises
    ------
    CheckpointMismatchError
        The folder holds work from a different sweep.

    Examples
    --------
    >>> import tempfile
    >>> import numpy as np
    >>> import complexity as cx
    >>> X, y = cx.datasets.pressure_sensor()
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     first = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10),
    ...                      random_state=0, checkpoint=folder)
    ...     again = cx.sweep(cx.PolynomialLadder(range(0, 4)), X, y, plan=cx.Bootstrap(10),
    ...                      random_state=0, checkpoint=folder)   # read back, nothing refitted
    >>> first.curves.equals(again.curves)
    True
    """
    path = check_path(checkpoint)
    assert path is not None
    store = _Store(path, fingerprint(problem, resamples, engine_name))
    done = store.finished(len(resamples))
    todo = [i for i in range(len(resamples)) if i not in done]
    fresh = iter(
        engine.run(problem, _Subset(resamples, todo), n_jobs=n_jobs, on_done=on_done)
        if todo
        else ()
    )
    C = problem.n_capacities
    for position in range(len(resamples)):
        if position in done:
            outcome = store.load(resamples[position], C)
            if on_done is not None:
                on_done(C)
        else:
            outcome = next(fresh)
            if outcome.index != position:  # pragma: no cover - engines yield in order
                raise RuntimeError(f"engine yielded resample {outcome.index}, expected {position}.")
            store.save(outcome)
        yield outcome
