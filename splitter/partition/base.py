"""The shared base of every split rule, and the record of how a design was made.

A rule (``SpatialBlocks``, ``Checkerboard``, ``Groups``...) checks its settings
when it is built, says which fold each usable record evaluates (``_folds``),
and inherits the rest: ``assign`` (records in, :class:`FoldAssignment` out, the
buffer applied the same way for every rule), the scikit-learn splitter protocol
(``split``, ``get_n_splits``) and a repr built from the constructor.

Library errors name the Python parameter (``block_size=-3: ...``); only the
command line turns ``block_size`` into ``--block-size``.
"""

from __future__ import annotations

import inspect
import numbers
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, replace

import numpy as np

from splitter.columns import find_column
from splitter.errors import InputError


# --- settings checks shared by the rules -------------------------------------

def check_fold_count(folds, minimum: int = 2) -> int:
    """An integer fold count of at least ``minimum``."""
    if isinstance(folds, bool) or not isinstance(folds, numbers.Integral):
        if isinstance(folds, numbers.Real) and float(folds).is_integer():
            folds = int(folds)
        else:
            raise InputError(f"folds={folds!r}: give a whole number of folds, at least {minimum}.")
    if folds < minimum:
        raise InputError(f"folds={folds!r}: need at least {minimum} folds.")
    return int(folds)


def check_buffer(buffer) -> float:
    """A buffer radius in km, 0 or more."""
    try:
        value = float(0.0 if buffer is None else buffer)
    except (TypeError, ValueError):
        raise InputError(f"buffer={buffer!r}: give a distance in km, 0 or more.") from None
    if not np.isfinite(value) or value < 0:
        raise InputError(f"buffer={buffer!r}: give a distance in km, 0 or more.")
    return value


def check_seed(seed) -> int:
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral):
        raise InputError(f"seed={seed!r}: give a whole number.")
    return int(seed)


def names(values, parameter: str) -> tuple:
    """A tuple of names from a list or a comma-separated string."""
    if values is None:
        return ()
    if isinstance(values, str):
        values = [values]
    out = []
    for v in values:
        if v is None:
            raise InputError(f"{parameter}={values!r}: give names, not None.")
        out.extend(s.strip() for s in str(v).split(",") if s.strip())
    return tuple(out)


def paths(values) -> tuple:
    """Raster paths as a tuple of text."""
    if values is None:
        return ()
    if isinstance(values, (str, bytes)) or hasattr(values, "__fspath__"):
        values = [values]
    return tuple(str(v) for v in values)


# --- what a rule sees and what it returns -------------------------------------

@dataclass(frozen=True)
class RuleInput:
    """The usable records, as arrays, in table order.

    Attributes
    ----------
    points : Points
    kind : ndarray of str ("presence", "absence", "background")
    table : DataFrame
        The whole input table; ``rows`` are the usable rows' positions in it.
    covariates : ndarray (n, p) or None
        Covariate values from ``env`` rasters and ``covariates`` columns.
    covariate_names : tuple of str
    groups : ndarray or None
        Group labels given to ``split(X, y, groups)``.
    records : Records or None
        The whole record set, as the shell read it.
    block_size_km : float or None
        The cell size the shell chose when a rule was given ``block_size='auto'``
        or ``'match'`` (both read rasters or fit models, which the core does not),
        and ``block_choice`` how it was chosen.
    """

    points: object
    kind: np.ndarray
    table: object
    rows: np.ndarray
    covariates: np.ndarray | None = None
    covariate_names: tuple = ()
    groups: np.ndarray | None = None
    records: object = None
    block_size_km: float | None = None
    block_choice: dict = field(default_factory=dict)

    @property
    def is_presence(self) -> np.ndarray:
        return self.kind == "presence"

    def column(self, name: str, parameter: str) -> np.ndarray:
        """Values of a table column (found as :func:`splitter.columns.find_column` finds
        it), or a clear error naming ``parameter``."""
        return self.table[find_column(self.table, name, parameter)].to_numpy(object)[self.rows]


@dataclass(frozen=True)
class RuleFolds:
    """One rule's answer for the usable rows.

    ``fold`` is 1..k (evaluates that fold), 0 (calibration only) or -1 (dropped,
    with its ``reason``). ``gaps`` are extra (row, fold) pairs left out of a
    fold's calibration set by the rule itself (space-and-time designs).
    ``measured`` holds what the rule chose or measured, by
    :class:`DesignParameters` field name.
    """

    fold: np.ndarray
    n_folds: int
    reason: np.ndarray | None = None
    measured: dict = field(default_factory=dict)
    geometry_crs: object = None
    gap_rows: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    gap_folds: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))


# --- the record of a design ---------------------------------------------------

_PROVENANCE = ("geometry_crs", "software", "inputs", "notes")


@dataclass(frozen=True)
class DesignParameters(Mapping):
    """How a design was made: the rule's settings and what the design measured.

    It is written as the sidecar's ``parameters`` (:meth:`to_dict`, only the
    fields that apply to the method) and read back from it
    (:meth:`from_dict`), so old fold tables still read. It also reads like the
    dict it replaces (``p["block_size_km"]``, ``p.get("ladder")``).

    Examples
    --------
    >>> p = DesignParameters(method="blocks", folds=5, seed=1, buffer_km=0.0,
    ...                      block_size_km=120.0, block_size_rule="given")
    >>> p.block_size_km, p["block_size_rule"], "ladder" in p
    (120.0, 'given', False)
    >>> DesignParameters.from_dict(p.to_dict()) == p
    True
    """

    method: str
    folds: int
    seed: int
    buffer_km: float
    block_size_km: float | None = None
    block_size_rule: str | None = None
    range_km: float | None = None
    range_summary: dict | None = None
    ladder: dict | None = None
    grid_offset_km: tuple | None = None
    occupied_cells: int | None = None
    cell_shape: str | None = None
    presence_imbalance: float | None = None
    background_imbalance: float | None = None
    absence_imbalance: float | None = None
    zero_means: str | None = None
    thin: object = None
    presence_before_thinning: int | None = None
    presence_after_thinning: int | None = None
    covariates: tuple | None = None
    standardised_on: str | None = None
    group_column: str | None = None
    fold_groups: dict | None = None
    calibrate_on: tuple | None = None
    evaluate_on: tuple | None = None
    time_column: str | None = None
    fold_periods: dict | None = None
    calibrate_before: float | None = None
    env: tuple | None = None
    geometry_crs: str | None = None
    software: str | None = None
    inputs: dict | None = None
    notes: tuple | None = None
    rule: object = field(default=None, compare=False, repr=False)

    def to_dict(self) -> dict:
        """The sidecar's ``parameters``: settings and measures that apply (no provenance)."""
        out = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name == "rule" or f.name in _PROVENANCE or v is None:
                continue
            out[f.name] = list(v) if isinstance(v, tuple) else v
        return out

    @classmethod
    def from_dict(cls, d: dict | None, **provenance) -> "DesignParameters":
        """Read a sidecar's ``parameters`` (unknown keys are ignored)."""
        d = dict(d or {})
        known = {f.name for f in fields(cls)} - {"rule"}
        kw = {k: (tuple(v) if isinstance(v, list) else v) for k, v in d.items() if k in known}
        kw.update({k: v for k, v in provenance.items() if v is not None})
        kw.setdefault("method", "given")
        kw.setdefault("folds", 0)
        kw.setdefault("seed", None)
        kw.setdefault("buffer_km", 0.0)
        return cls(**kw)

    def _flat(self) -> dict:
        out = self.to_dict()
        for k in _PROVENANCE:
            v = getattr(self, k)
            if v is not None:
                out[k] = list(v) if isinstance(v, tuple) else v
        return out

    # Mapping: reads like the dict it replaces.
    def __getitem__(self, key):
        flat = self._flat()
        if key not in flat:
            raise KeyError(key)
        return flat[key]

    def __iter__(self):
        return iter(self._flat())

    def __len__(self) -> int:
        return len(self._flat())

    def __contains__(self, key) -> bool:
        return key in self._flat()

    def replace(self, **kw) -> "DesignParameters":
        return replace(self, **kw)


# --- the base class -----------------------------------------------------------

class FoldRule:
    """Base of the split rules.

    Subclasses set ``method`` (the ``design()`` name), check their settings in
    ``__init__`` (storing each under its parameter name) and write
    ``_folds(data: RuleInput) -> RuleFolds``. Everything else is shared.

    The core rule works on arrays only. Reading records (a path or a data
    frame), ``assign`` and scikit-learn's ``split`` are added by the public
    classes in :mod:`splitter.workflow.design` (``splitter.SpatialBlocks`` and so on).
    """

    method: str = ""
    one_way = False  # a one-way design: calibration-only rows (fold 0) and one evaluation fold

    # -- construction and repr, from the constructor's signature (as scikit-learn does)
    @classmethod
    def _parameter_names(cls) -> list[str]:
        sig = inspect.signature(cls.__init__)
        return [p.name for p in sig.parameters.values() if p.name != "self" and p.kind != p.VAR_KEYWORD]

    def get_params(self, deep: bool = False) -> dict:
        """The settings, by constructor parameter name."""
        return {n: getattr(self, n) for n in self._parameter_names()}

    def __repr__(self) -> str:
        sig = inspect.signature(type(self).__init__)
        shown = []
        for n in self._parameter_names():
            v = getattr(self, n)
            default = sig.parameters[n].default
            same = default is not inspect.Parameter.empty and _same(v, default)
            if not same:
                shown.append(f"{n}={v!r}")
        return f"{type(self).__name__}({', '.join(shown)})"

    def __eq__(self, other) -> bool:
        return type(self) is type(other) and all(_same(a, b) for a, b in zip(self.get_params().values(), other.get_params().values()))

    __hash__ = None

    def _common(self, buffer, seed, env, covariates):
        self.buffer = check_buffer(buffer)
        self.seed = check_seed(seed)
        self.env = paths(env)
        self.covariates = names(covariates, "covariates")

    # -- what each rule writes
    def _folds(self, data: RuleInput) -> RuleFolds:  # pragma: no cover - abstract
        raise NotImplementedError

    def design_parameters(self, n_folds: int) -> DesignParameters:
        """The settings part of the design record (measures are added by ``assign``)."""
        return DesignParameters(method=self.method, folds=int(n_folds), seed=self.seed, buffer_km=self.buffer, rule=self)


def _same(a, b) -> bool:
    try:
        return bool(a == b) if not isinstance(a, np.ndarray) else bool(np.array_equal(a, b))
    except Exception:  # pragma: no cover - exotic values
        return a is b


def imbalance(counts: np.ndarray) -> float:
    """(largest - smallest) / mean of per-fold counts, rounded to 4 places (0 = even)."""
    counts = np.asarray(counts, float)
    return round(float((counts.max() - counts.min()) / counts.mean()), 4) if counts.size and counts.mean() > 0 else 0.0
