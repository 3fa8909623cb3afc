"""Read a user's prediction table: one row per record and fold, the fold's model's score.

The table is read as records are (comma, semicolon or tab; a decimal comma; column
names in any case). What a careless reading would hide is refused with one line:
a score that is not a number (a missing one is an empty field, NA or nan, and its
record is dropped as ``no-prediction``), and two scores for one record and fold.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from splitter.errors import InputError
from splitter.io.records import covariate_numbers, read_csv_table

__all__ = ["read_prediction_table", "COLUMNS"]

COLUMNS = ("record_id", "fold", "prediction")
# Spellings of "no value" (common practice: R writes NA, pandas an empty field, numpy nan).
MISSING = frozenset({"", "na", "nan", "null", "none", "-"})


def read_prediction_table(table) -> pd.DataFrame:
    """``record_id`` and ``fold`` as text, ``prediction`` as float (NaN where missing).

    Parameters
    ----------
    table : path-like or DataFrame
        CSV (any of the delimiters records may use) or a DataFrame with columns
        record_id, fold and prediction, in any case.

    Examples
    --------
    >>> t = read_prediction_table(pd.DataFrame({"Record_ID": [1, 2], "Fold": [1, 1], "Prediction": ["0,5", "NA"]}))
    >>> t.to_dict("list")
    {'record_id': ['1', '2'], 'fold': ['1', '1'], 'prediction': [0.5, nan]}
    """
    if isinstance(table, (str, Path)):
        path = Path(table)
        if not path.exists():
            raise InputError(f"{path}: no such prediction table; check the path.")
        df, src, first_row = read_csv_table(path), str(path), 2  # rows as a spreadsheet numbers them
    else:
        df, src, first_row = pd.DataFrame(table).reset_index(drop=True), "prediction table", 0
    lower = {str(c).strip().lower(): c for c in df.columns}
    missing = [n for n in COLUMNS if n not in lower]
    if missing:
        raise InputError(f"{src}: missing column(s) {', '.join(missing)}; it needs record_id, fold, prediction "
                         f"(its columns are: {', '.join(map(str, df.columns))}).")
    record_id = df[lower["record_id"]].astype(str).str.strip().to_numpy(object)
    fold = df[lower["fold"]].astype(str).str.strip().to_numpy(object)
    raw = df[lower["prediction"]]
    prediction = np.asarray(covariate_numbers(raw), dtype=float)
    text = raw.astype(str).str.strip()
    bad = np.isnan(prediction) & ~text.str.lower().isin(MISSING).to_numpy()
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"{src}: row {i + first_row}: prediction '{text.iloc[i]}' is not a number; give the "
                         "model's score, or leave it empty where the model gave none.")
    keys = pd.DataFrame({"record_id": record_id, "fold": fold})
    twice = keys.duplicated(keep=False).to_numpy()
    if twice.any():
        i = int(np.flatnonzero(twice)[0])
        rows = np.flatnonzero(twice & (record_id == record_id[i]) & (fold == fold[i]))[:3] + first_row
        raise InputError(f"{src}: record '{record_id[i]}' has more than one prediction for fold '{fold[i]}' "
                         f"(rows {', '.join(map(str, rows))}); give one per record and fold.")
    return pd.DataFrame({"record_id": record_id, "fold": fold, "prediction": prediction})
