"""The result of a design: which fold each record evaluates, and the buffer gaps."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from splitter.errors import InputError

NO_FOLD = -1  # dropped records: written as an empty cell


KINDS = ("presence", "absence", "background")

@dataclass(frozen=True)
class FoldAssignment:
    """Folds of a record table.

    Positions (row numbers, 0-based) refer to the rows of the records table,
    dropped rows included, so arrays built from the same table line up.

    Attributes
    ----------
    record_id, kind, dropped : ndarray of str, one per row
    fold : ndarray of int, one per row
        1..k = the fold in which the row is an evaluation record, 0 = calibration
        only, -1 = dropped.
    n_folds : int
    gap_rows, gap_folds : ndarray of int
        Row ``gap_rows[m]`` is left out of fold ``gap_folds[m]``'s calibration set
        because it lies within the buffer of that fold's evaluation records.
    method : str
    parameters : DesignParameters or dict
        How the folds were made: the rule's settings and what the design
        measured (a dict for a fold table read without its sidecar).

    Examples
    --------
    >>> a = FoldAssignment.from_folds(["a", "b", "c", "d"], ["presence"] * 4, [1, 2, 1, 2])
    >>> a.evaluation(1).tolist(), a.calibration(1).tolist()
    ([0, 2], [1, 3])
    """

    record_id: np.ndarray
    kind: np.ndarray
    fold: np.ndarray
    dropped: np.ndarray
    n_folds: int
    gap_rows: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    gap_folds: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    method: str = "given"
    parameters: Mapping = field(default_factory=dict)
    records: object = field(default=None, repr=False, compare=False)
    covariates: np.ndarray | None = field(default=None, repr=False, compare=False)
    covariate_names: tuple = ()

    @classmethod
    def from_folds(cls, record_id, kind, fold, dropped=None, **kw) -> "FoldAssignment":
        fold = np.asarray(fold, np.int64)
        n = fold.size
        if dropped is None:
            dropped = np.where(fold < 0, "no-fold", "")
        n_folds = int(fold.max()) if n else 0
        return cls(np.asarray(record_id, object), np.asarray(kind, object), fold,
                   np.asarray(dropped, object), n_folds, **kw)

    def __len__(self) -> int:
        return self.fold.size

    @property
    def folds(self) -> list[int]:
        """Fold numbers that have evaluation records (1..k)."""
        return list(range(1, self.n_folds + 1))

    def evaluation(self, i: int) -> np.ndarray:
        """Row positions of fold ``i``'s evaluation records."""
        self._check_fold(i)
        return np.flatnonzero(self.fold == i)

    def calibration(self, i: int) -> np.ndarray:
        """Row positions of fold ``i``'s calibration records (buffer gaps removed)."""
        self._check_fold(i)
        mask = (self.fold >= 0) & (self.fold != i)
        mask[self.gap_rows[self.gap_folds == i]] = False
        return np.flatnonzero(mask)

    def gaps(self, i: int) -> np.ndarray:
        """Row positions removed from fold ``i``'s calibration set by the buffer."""
        return np.sort(self.gap_rows[self.gap_folds == i])

    def _check_fold(self, i):
        if not 1 <= int(i) <= self.n_folds:
            raise InputError(f"fold {i} does not exist; folds are 1..{self.n_folds}.")

    def to_frame(self, text: bool = False) -> pd.DataFrame:
        """The fold table: the input's rows and columns plus record_id, kind, fold, dropped.

        ``fold`` is a nullable integer (<NA> = dropped). Columns of a CSV whose
        every cell is a number come back as numbers; ``text=True`` keeps the
        cells exactly as the file wrote them (what the fold-table writer uses).
        Without the input table (an assignment built from bare arrays) only the
        four added columns are given.
        """
        fold = pd.array(np.where(self.fold < 0, 0, self.fold), dtype="Int64")
        fold[self.fold < 0] = pd.NA
        added = pd.DataFrame({
            "record_id": self.record_id.astype(str),
            "kind": self.kind.astype(str),
            "fold": fold,
            "dropped": self.dropped.astype(str),
        })
        if self.records is None:
            return added
        source = self.records.table if text or not hasattr(self.records, "typed_table") else self.records.typed_table()
        table = source.reset_index(drop=True).copy()
        if "geometry" in table.columns:
            table = table.drop(columns="geometry")
        # Compared and assigned as Series (both indexed 0..n-1): string columns stay in pandas'
        # own string storage instead of a round trip through a million Python objects each.
        for c in added.columns:
            if c in table.columns:
                same = table[c].astype(str).str.strip() == added[c].astype(str).replace("<NA>", "")
                if not same.all():
                    # An input column that clashes with ours is kept under another name.
                    table = table.rename(columns={c: f"{c}_input"})
            table[c] = added[c]
        return table

    def to_geodataframe(self):
        """The fold table (as :meth:`to_frame`) with point geometry in the records' CRS.

        Rows without coordinates get an empty geometry.

        Examples
        --------
        >>> import pandas as pd, splitter
        >>> df = pd.DataFrame({"lon": [10.0, 10.1, 11.0, 11.1], "lat": [45.0, 45.1, 46.0, 46.1]})
        >>> g = splitter.RandomFolds(folds=2, seed=0).assign(df).to_geodataframe()
        >>> g.crs.to_epsg(), g.geometry.x.tolist()
        (4326, [10.0, 10.1, 11.0, 11.1])
        """
        import geopandas as gpd

        if self.records is None:
            raise InputError("this fold assignment carries no coordinates (built from bare arrays); design it from records.")
        pts = self.records.points
        ok = np.isfinite(pts.x) & np.isfinite(pts.y)
        geom = gpd.points_from_xy(np.where(ok, pts.x, 0.0), np.where(ok, pts.y, 0.0))
        geom[~ok] = None
        frame = self.to_frame()
        if "geometry" in frame.columns:
            frame = frame.rename(columns={"geometry": "geometry_input"})
        return gpd.GeoDataFrame(frame, geometry=geom, crs=pts.crs)

    def gaps_frame(self) -> pd.DataFrame:
        """One row per (record, fold) left out of that fold's calibration set."""
        order = np.lexsort((self.gap_rows, self.gap_folds))
        return pd.DataFrame({
            "record_id": self.record_id[self.gap_rows[order]].astype(str),
            "fold": self.gap_folds[order].astype(np.int64),
        })

    @property
    def kind_codes(self) -> np.ndarray:
        """Each record's kind as its position in ``KINDS`` (3 for any other word): per-fold
        counts are then bincounts, not string comparisons over a million records."""
        code = pd.Categorical(self.kind, categories=KINDS).codes.astype(np.int64)
        code[code < 0] = len(KINDS)
        return code

    @property
    def generalised_km(self) -> float | None:
        """The cell size (km) the fold table's coordinates were generalised to, as its
        sidecar says (``design --generalise``); None for exact coordinates."""
        design = self.parameters.get("design") if isinstance(self.parameters, dict) else None
        g = design.get("generalised_km") if isinstance(design, dict) else None
        return float(g) if g else None

    def counts(self) -> pd.DataFrame:
        """Records per fold: evaluation and calibration counts by kind, and gaps."""
        kinds = KINDS
        code = self.kind_codes
        gaps = np.bincount(self.gap_folds, minlength=self.n_folds + 1) if self.gap_folds.size else None
        rows = []
        for i in self.folds:
            ev = np.bincount(code[self.evaluation(i)], minlength=len(kinds) + 1)
            cal = np.bincount(code[self.calibration(i)], minlength=len(kinds) + 1)
            row = {"fold": i}
            row.update({f"evaluation_{k}": int(ev[j]) for j, k in enumerate(kinds)})
            row.update({f"calibration_{k}": int(cal[j]) for j, k in enumerate(kinds)})
            row["gap"] = int(gaps[i]) if gaps is not None and i < gaps.size else 0
            rows.append(row)
        return pd.DataFrame(rows)

    def as_cv(self) -> "FoldSplitter":
        """A scikit-learn CV splitter yielding (calibration, evaluation) per fold."""
        return FoldSplitter(self)


class FoldSplitter:
    """scikit-learn splitter protocol over a :class:`FoldAssignment`.

    ``X`` must have one row per record-table row (dropped rows included; they
    appear in no set), so indices line up with the fold table.

    Examples
    --------
    >>> a = FoldAssignment.from_folds(["a", "b", "c", "d"], ["presence"] * 4, [1, 2, 1, -1])
    >>> [(cal.tolist(), ev.tolist()) for cal, ev in a.as_cv().split(None)]
    [([1], [0, 2]), ([0, 2], [1])]
    """

    def __init__(self, assignment: FoldAssignment):
        self.assignment = assignment

    def get_n_splits(self, X=None, y=None, groups=None) -> int:
        return self.assignment.n_folds

    def split(self, X, y=None, groups=None):
        n = len(self.assignment)
        if X is not None and len(X) != n:
            raise ValueError(f"X has {len(X)} rows but the fold table has {n}; build X from the same table.")
        for i in self.assignment.folds:
            yield self.assignment.calibration(i), self.assignment.evaluation(i)
