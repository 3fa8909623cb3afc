"""Read occurrence records (CSV or any vector file) into a validated table.

Every input row is kept, in order, with its original columns untouched (CSV cells
are read as text so that ``1.50`` stays ``1.50``). Rows that cannot take part get a
``dropped`` reason instead of disappearing.
"""

from __future__ import annotations

import csv as _csv
import hashlib
import io as _io
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj

from splitter.columns import first_column, match_column
from splitter.errors import InputError
from splitter.geo import WGS84, Points, is_planar, parse_crs

X_NAMES = ("longitude", "lon", "long", "lng", "decimallongitude", "x", "easting")
Y_NAMES = ("latitude", "lat", "decimallatitude", "y", "northing")
# Our own column, then Darwin Core's term (present / absent), as in GBIF downloads.
KIND_NAMES = ("kind", "occurrencestatus")
# Columns naming the species (ours, then Darwin Core's terms).
SPECIES_NAMES = ("species", "scientificname", "taxon", "species_name")
# Names a survey's 0/1 presence column goes by (letters and digits only, lower case).
PRESENCE_LIKE = frozenset({"present", "presence", "pres", "pa", "presenceabsence", "presabs", "occurrence", "occ",
                           "detected", "detection", "observed", "found", "response"})
VECTOR_SUFFIXES = {".gpkg", ".parquet", ".geoparquet", ".shp", ".geojson", ".json", ".fgb"}
KIND_VALUES = {
    "presence": "presence", "present": "presence",
    "absence": "absence", "absent": "absence",
    "background": "background", "pseudo-absence": "background",
}
# A 0/1 (TRUE/FALSE, yes/no) column: the "1" side is always presence, but the "0"
# side is a survey's absence (surveyed, not found) in one table and background in
# another, and the tests that follow differ; so 0 is never guessed (zero_means).
ONE_VALUES = ("1", "true", "yes", "y", "t")
ZERO_VALUES = ("0", "false", "no", "n", "f")
ZERO_MEANS = ("absence", "background")
ADDED_COLUMNS = ("record_id", "kind", "fold", "dropped")


def sha256_of(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


@dataclass(frozen=True)
class Records:
    """Occurrence records read from one or more files.

    Attributes
    ----------
    table : DataFrame
        The input rows with their original columns (text for CSV input).
    points : Points
        Coordinates in ``crs`` (NaN where a row has none).
    record_id, kind, dropped : ndarray of str
        One entry per row; ``dropped`` is "" for usable rows.
    x_column, y_column : str or None
        Coordinate columns of CSV input (None for vector input).
    sources : dict
        File name -> SHA-256 of each input file.
    notes : list of str
        Things the reader decided that a user should know.
    zero_means : str or None
        What 0 meant in a 0/1 kind column ("absence" or "background"), when one was read.
    """

    table: pd.DataFrame
    points: Points
    record_id: np.ndarray
    kind: np.ndarray
    dropped: np.ndarray
    x_column: str | None = None
    y_column: str | None = None
    sources: dict = field(default_factory=dict)
    notes: tuple = ()
    zero_means: str | None = None

    def __len__(self) -> int:
        return len(self.table)

    @property
    def kept(self) -> np.ndarray:
        return self.dropped == ""

    def with_dropped(self, mask, reason: str) -> "Records":
        """Mark still-kept rows in ``mask`` as dropped with ``reason``."""
        dropped = self.dropped.copy()
        sel = np.asarray(mask, bool) & (dropped == "")
        dropped[sel] = reason
        return _replace(self, dropped=dropped)

    def typed_table(self) -> pd.DataFrame:
        """The table with numeric-looking text columns as numbers (files keep the text)."""
        return numeric_columns(self.table)

    def counts(self) -> dict:
        kept = self.kept
        out = {k: int(np.sum(kept & (self.kind == k))) for k in ("presence", "absence", "background")}
        out["dropped"] = int(np.sum(~kept))
        return out


def numeric_columns(table: pd.DataFrame) -> pd.DataFrame:
    """Text columns whose every non-blank cell is a number, as numbers.

    Integers stay integers (floats when a cell is blank); codes with a leading
    zero (``007``) stay text.

    Examples
    --------
    >>> t = numeric_columns(pd.DataFrame({"a": ["1", "2"], "b": ["1.5", ""], "c": ["007", "8"], "d": ["x", "1"]}))
    >>> [pd.api.types.is_numeric_dtype(t[c]) for c in t.columns], t["a"].tolist()
    ([True, True, False, False], [1, 2])
    """
    out = table.copy()
    for c in table.columns:
        col = table[c]
        if not (col.dtype == object or pd.api.types.is_string_dtype(col)):
            continue
        text = col.astype(str).str.strip()
        blank = text == ""
        if blank.all() or text[~blank].str.match(r"^[+-]?0\d").any():
            continue
        num = pd.to_numeric(text.where(~blank), errors="coerce")
        if num[~blank].notna().all() and not text[~blank].str.lower().isin(["nan", "inf", "-inf", "infinity"]).any():
            out[c] = num
    return out


def as_records(records, *, x=None, y=None, crs=None, id_column=None, kind_column=None, zero_means=None) -> Records:
    """Records from a path, a pandas DataFrame, a GeoDataFrame or Records (returned as is)."""
    if isinstance(records, Records):
        return records
    if isinstance(records, (str, Path, pd.DataFrame)) or hasattr(records, "__fspath__"):
        return read_records(records, x=x, y=y, crs=crs, id_column=id_column, kind_column=kind_column,
                            zero_means=zero_means)
    raise InputError(f"records: got {type(records).__name__}; give a path, a pandas DataFrame with coordinate "
                     "columns, a GeoDataFrame or a splitter Records object.")


def _replace(rec: Records, **kw) -> Records:
    from dataclasses import replace

    return replace(rec, **kw)


def _decode_csv(path: Path) -> str:
    raw = path.read_bytes()
    if not raw.strip():
        raise InputError(f"{path}: the file is empty; give a table with a header row and one row per record.")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        line = raw[: e.start].count(b"\n") + 1
        raise InputError(
            f"{path}: line {line} is not UTF-8 text (byte 0x{raw[e.start]:02x}); "
            "re-save the file as UTF-8 (e.g. 'Save as CSV UTF-8')."
        ) from None


def _find_column(columns, wanted, names, option, path) -> str:
    if wanted is not None:
        found = match_column(columns, wanted)
        if found is None:
            raise InputError(f"{path}: no column named '{wanted}' (given with {option}); columns are: {', '.join(columns)}.")
        return found
    return first_column(columns, names)


def read_csv_table(path: Path) -> pd.DataFrame:
    """A delimited text table as strings: comma, semicolon or tab (from the header), a
    byte-order mark and non-UTF-8 text handled, repeated column names refused."""
    text = _decode_csv(path)
    header = text.split("\n", 1)[0]
    # Comma unless the header plainly uses another delimiter (semicolon CSVs from
    # spreadsheets with a decimal comma, or tab-separated text).
    sep = max((",", ";", "\t"), key=lambda d: (header.count(d), d == ","))
    names = next(_csv.reader([header.rstrip("\r")], delimiter=sep))
    twice = sorted({n.strip() for n in names if n.strip() and sum(m.strip() == n.strip() for m in names) > 1})
    if twice:
        raise InputError(f"{path}: column '{twice[0]}' appears more than once in the header; "
                         "rename the copies so each column has its own name.")
    try:
        table = pd.read_csv(_io.StringIO(text), sep=sep, dtype=str, keep_default_na=False, na_filter=False)
    except pd.errors.EmptyDataError:
        raise InputError(f"{path}: the file is empty; give a table with a header row and one row per record.") from None
    except pd.errors.ParserError as e:
        raise InputError(f"{path}: cannot be read as CSV ({str(e).splitlines()[0]}); check the delimiter and quoting.") from None
    if len(table) == 0:
        raise InputError(f"{path}: the table has a header but no rows; add one row per record.")
    return table


def read_records(
    path,
    *,
    x: str | None = None,
    y: str | None = None,
    crs=None,
    id_column: str | None = None,
    kind_column: str | None = None,
    default_kind: str = "presence",
    zero_means: str | None = None,
) -> Records:
    """Read occurrence records from a CSV or vector file.

    Parameters
    ----------
    path : path-like, DataFrame or GeoDataFrame
        CSV with coordinate columns, or a GeoPackage, GeoParquet, Shapefile, ...;
        from Python also a pandas DataFrame (coordinate columns detected as for
        CSV, ``crs`` default EPSG:4326) or a GeoDataFrame (its own CRS). A
        DataFrame's columns keep their types.
    x, y : str, optional
        Coordinate columns of a CSV; detected from common spellings when omitted.
    crs : str, optional
        CRS of CSV coordinates (default EPSG:4326) or of a vector file without one.
    id_column : str, optional
        Column holding record ids (default: ``record_id`` if present, else row number).
    kind_column : str, optional
        Column saying presence / absence / background, or 1 / 0 (TRUE / FALSE,
        yes / no) with ``zero_means``. Default: a column named ``kind`` or
        ``occurrenceStatus`` (Darwin Core; any case), else every row is
        ``default_kind``; a column of kind words under another name must then
        be named here (an error says so), or ``"none"`` given to take every row
        as ``default_kind``.
    zero_means : {"absence", "background"}, optional
        What 0 (FALSE, no) means in a 0/1 kind column: a survey's absence
        (surveyed, not found) or background. Required when such values occur;
        never guessed.

    Returns
    -------
    Records

    Examples
    --------
    >>> recs = read_records("demo_data/records.csv")
    >>> int(recs.counts()["presence"]), recs.x_column, recs.y_column
    (430, 'longitude', 'latitude')
    """
    notes = []
    if isinstance(path, pd.DataFrame):  # from Python: a DataFrame or a GeoDataFrame
        label, sources = f"records ({type(path).__name__})", {}
        if hasattr(path, "geometry") and type(path).__name__ == "GeoDataFrame":
            table, pts, x_col, y_col = _vector_frame(path, label, crs, notes)
        else:
            table = path.reset_index(drop=True)
            if len(table) == 0:
                raise InputError(f"{label}: the table has no rows; give one row per record.")
            pts, x_col, y_col = _csv_points(table, label, x, y, crs, notes)
        path = label
    else:
        path = Path(path)
        if not path.exists():
            raise InputError(f"{path}: no such file; check the path.")
        if path.is_dir():
            raise InputError(f"{path}: is a folder; give the records file inside it.")
        sources = {str(path): sha256_of(path)}
        if path.suffix.lower() in VECTOR_SUFFIXES:
            table, pts, x_col, y_col = _read_vector(path, crs, notes)
        else:
            table = read_csv_table(path)
            pts, x_col, y_col = _csv_points(table, path, x, y, crs, notes)

    n = len(table)
    dropped = np.full(n, "", dtype=object)

    # Coordinates: missing or out of range rows are dropped, whole-file problems are errors.
    finite = np.isfinite(pts.x) & np.isfinite(pts.y)
    if not finite.any():
        what = f"columns '{x_col}' and '{y_col}'" if x_col else "the geometry"
        raise InputError(f"{path}: no row has numeric coordinates in {what}; check the columns or name them with --x/--y.")
    dropped[~finite] = "missing-coordinates"
    if pts.geographic:
        lon_ok = np.abs(pts.x) <= 180
        lat_ok = np.abs(pts.y) <= 90
        bad_lat = finite & ~lat_ok
        if bad_lat.sum() > 0.5 * finite.sum():
            swapped = finite & (np.abs(pts.x) <= 90) & (np.abs(pts.y) <= 180)
            hint = (
                f" They fit as longitudes: the columns look swapped; name them with --x {y_col} --y {x_col}."
                if x_col and swapped.sum() >= bad_lat.sum()
                else " If the coordinates are projected, give their CRS with --crs."
            )
            raise InputError(f"{path}: {int(bad_lat.sum())} of {int(finite.sum())} rows have latitudes outside -90..90.{hint}")
        east = finite & (pts.x > 180) & (pts.x <= 360)
        if east.sum() > 0.5 * finite.sum():
            # Longitudes given 0..360 (common in climate grids): not guessed at, since a
            # wrong shift moves every record to the other side of the globe.
            raise InputError(
                f"{path}: {int(east.sum())} of {int(finite.sum())} rows have longitudes in '{x_col or 'the geometry'}' "
                "between 180 and 360 (the 0..360 convention); subtract 360 from values above 180 to give -180..180."
            )
        dropped[finite & ~(lon_ok & lat_ok)] = "coordinates-out-of-range"
    elif is_planar(pts.crs):
        _check_planar(pts, finite, path, x_col, notes)

    record_id = _record_ids(table, path, id_column)
    kind_column = _kind_column(table, path, kind_column, default_kind,
                               (x_col, y_col, match_column(table.columns, id_column or "record_id")))
    kind = _kinds(table, path, kind_column, default_kind, dropped, zero_means)
    _warn_several_species(table, kind, path, notes)
    return Records(
        table=table, points=pts, record_id=record_id, kind=kind, dropped=dropped,
        x_column=x_col, y_column=y_col, sources=sources, notes=tuple(notes),
        zero_means=zero_means if _zero_one(table, kind_column) else None,
    )


def _csv_points(table, path, x, y, crs, notes):
    cols = list(table.columns)
    x_col = _find_column(cols, x, X_NAMES, "--x", path)
    y_col = _find_column(cols, y, Y_NAMES, "--y", path)
    if x_col is None or y_col is None:
        raise InputError(
            f"{path}: no coordinate columns found (looked for longitude/lon/x/easting and latitude/lat/y/northing); "
            f"columns are: {', '.join(cols)}; name them with --x COLUMN --y COLUMN."
        )
    xs = _numbers(table[x_col])
    ys = _numbers(table[y_col])
    crs_obj = WGS84 if crs is None else _given_crs(crs)
    return Points(xs, ys, crs_obj), x_col, y_col


def _given_crs(crs) -> pyproj.CRS:
    return parse_crs(crs)


#: Largest coordinate magnitude a planar grid can have, in km (Earth's circumference):
#: beyond it the stated unit is wrong (e.g. metres given as planar:km).
PLANAR_LIMIT_KM = 40_075.0


def _check_planar(pts: Points, finite, path, x_col, notes):
    """Planar coordinates are taken as given; values no grid in the stated unit can hold are refused,
    and values that look like longitude/latitude get a warning (not a guess)."""
    from splitter.geo import crs_text

    unit = crs_text(pts.crs)
    f = pts.crs.axis_info[0].unit_conversion_factor / 1000.0
    big = finite & ((np.abs(pts.x) * f > PLANAR_LIMIT_KM) | (np.abs(pts.y) * f > PLANAR_LIMIT_KM))
    if big.any():
        row = int(np.flatnonzero(big)[0]) + 2
        raise InputError(
            f"{path}: row {row} has coordinates ({pts.x[row - 2]:g}, {pts.y[row - 2]:g}) beyond "
            f"{PLANAR_LIMIT_KM:,.0f} km from the origin, which no grid in the unit of crs={unit} can hold; "
            "check the unit (planar:m for metres) or rescale the columns.")
    x, y = pts.x[finite], pts.y[finite]
    frac = (np.abs(x - np.round(x)) > 0).mean() if x.size else 0.0
    if x.size and np.all(np.abs(x) <= 180) and np.all(np.abs(y) <= 90) and frac > 0.5 and np.ptp(x) < 20 and np.ptp(y) < 20:
        notes.append(f"warning: {path}: every coordinate lies within -180..180 / -90..90 with decimals, as "
                     f"longitude/latitude do; they are read as a planar grid ({unit}) as given; if they are "
                     "degrees, leave out --crs (EPSG:4326).")


def plain_numbers(column: pd.Series) -> np.ndarray | None:
    """A column as float64 when every cell is a plain number (``12``, ``-0.5``, ``1e3``),
    else None, for the caller's slower, more forgiving parse (blanks, spaces, decimal commas).

    Text is cast by pyarrow in one call, about 20 times faster than parsing cell by cell
    at 10^6 records (CSV columns are read as text, so every covariate and coordinate
    comes through here).

    Examples
    --------
    >>> plain_numbers(pd.Series(["1.5", "-2", "3e2"])).tolist()
    [1.5, -2.0, 300.0]
    >>> plain_numbers(pd.Series(["1,5", ""])) is None
    True
    """
    if pd.api.types.is_bool_dtype(column):
        return None
    if pd.api.types.is_numeric_dtype(column):
        return column.to_numpy(float)
    import pyarrow as pa
    import pyarrow.compute as pc

    try:
        arr = pa.array(column)
        if not (pa.types.is_string(arr.type) or pa.types.is_large_string(arr.type)):
            return None
        return np.asarray(pc.cast(arr, pa.float64()).to_numpy(zero_copy_only=False), dtype=float)
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError, TypeError, ValueError):
        return None


def covariate_numbers(column: pd.Series) -> np.ndarray:
    """A covariate column as floats: plain numbers cast at once, else spaces trimmed and a
    decimal comma read as a point, anything else missing (NaN).

    Examples
    --------
    >>> covariate_numbers(pd.Series([" 1,5", "2", "", "n/a"])).tolist()
    [1.5, 2.0, nan, nan]
    """
    fast = plain_numbers(column)
    if fast is not None:
        return fast
    text = column.astype(str).str.strip().str.replace(",", ".", regex=False)
    return pd.to_numeric(text, errors="coerce").to_numpy(float)


def _numbers(column: pd.Series) -> np.ndarray:
    """Coordinates as floats; a decimal comma (``45,12``) is read as a point."""
    fast = plain_numbers(column)
    if fast is not None:
        return fast
    text = column.astype(str).str.strip()
    if not text.str.contains(".", regex=False).any():
        text = text.str.replace(",", ".", regex=False)
    return pd.to_numeric(text, errors="coerce").to_numpy(float)


def _read_vector(path, crs, notes):
    import geopandas as gpd

    try:
        if path.suffix.lower() in {".parquet", ".geoparquet"}:
            gdf = gpd.read_parquet(path)
        else:
            gdf = gpd.read_file(path)
    except Exception as e:  # pyogrio/arrow raise many types
        raise InputError(f"{path}: cannot be read as a vector file ({str(e).splitlines()[0]}).") from None
    return _vector_frame(gdf, path, crs, notes)


def _vector_frame(gdf, path, crs, notes):
    name = getattr(path, "name", path)
    gdf = gdf.reset_index(drop=True)
    if len(gdf) == 0:
        raise InputError(f"{path}: the layer has no features; give one point per record.")
    geom = gdf.geometry
    if not geom.is_empty.all() and not (geom.geom_type.dropna() == "Point").all():
        raise InputError(f"{path}: geometries must be points (found {', '.join(sorted(set(geom.geom_type.dropna())))}).")
    empty = geom.isna() | geom.is_empty
    xs = np.where(empty, np.nan, geom.x.where(~empty).to_numpy(float))
    ys = np.where(empty, np.nan, geom.y.where(~empty).to_numpy(float))
    file_crs = gdf.crs
    if crs is not None:
        crs_obj = _given_crs(crs)
        if file_crs is not None and pyproj.CRS.from_user_input(file_crs) != crs_obj:
            notes.append(f"{name}: --crs {crs} overrides the file's CRS.")
    elif file_crs is not None:
        crs_obj = pyproj.CRS.from_user_input(file_crs)
    else:
        ok = np.isfinite(xs) & np.isfinite(ys)
        if ok.any() and np.all(np.abs(xs[ok]) <= 180) and np.all(np.abs(ys[ok]) <= 90):
            crs_obj = WGS84
            notes.append(f"{name}: the file has no CRS; coordinates look like lon/lat, so EPSG:4326 is assumed.")
        else:
            raise InputError(f"{path}: the file has no CRS and its coordinates are projected; give the CRS with --crs (e.g. --crs EPSG:3035).")
    table = pd.DataFrame(gdf)
    return table, Points(xs, ys, crs_obj), None, None


def _record_ids(table, path, id_column) -> np.ndarray:
    col = match_column(table.columns, "record_id" if id_column is None else id_column)
    if col is None and id_column is not None:
        col = id_column  # not there: said below
    if col is None:
        return np.array([str(i) for i in range(1, len(table) + 1)], dtype=object)
    if col not in table.columns:
        raise InputError(f"{path}: no id column '{col}' (given with --id-column); columns are: {', '.join(map(str, table.columns))}.")
    ids = table[col].astype(str).str.strip().to_numpy(object)
    empty = np.flatnonzero(ids == "")
    if empty.size:
        raise InputError(f"{path}: row {empty[0] + 2} has an empty id in column '{col}'; every record needs an id.")
    s = pd.Series(ids)
    dup = s.duplicated(keep=False)
    if dup.any():
        first = s[dup].iloc[0]
        rows = (np.flatnonzero(dup.to_numpy() & (ids == first)) + 2)[:3]
        raise InputError(
            f"{path}: duplicate id '{first}' in column '{col}' (rows {', '.join(map(str, rows))}); ids must be unique."
        )
    return ids


def _kind_column(table, path, given, default_kind, taken) -> str | None:
    """The column saying what each record is: the one given, else one of KIND_NAMES
    (any case). Without one every row is ``default_kind``, so a column of kind words
    under another name (``status``: present / absent) is never passed over in silence:
    reading absences as presences would corrupt every test that follows."""
    if given is not None:
        # "none" (when no column has that name): no kind column, every row is default_kind
        return None if given.lower() == "none" and given not in table.columns else (match_column(table.columns, given) or given)
    found = kind_column_in(table.columns)
    if found is not None:
        return found
    for c in table.columns:
        if c in taken:
            continue
        head = set(_kind_text(table[c].head(1000))) - {""}
        zero_one = re.sub(r"[^0-9a-z]", "", str(c).lower()) in PRESENCE_LIKE
        if not head or not (head <= KIND_VALUES.keys() or zero_one and head <= set(ONE_VALUES + ZERO_VALUES)):
            continue  # the cheap look first: most columns fail here
        words = set(_kind_text(table[c])) - {""}
        named = words <= KIND_VALUES.keys()
        # Only values that say something else than default_kind matter: 0 in a records
        # file (read as presences), 1 in a background file (read as background).
        contrary = (any(KIND_VALUES[w] != default_kind for w in words) if named else
                    zero_one and words <= set(ONE_VALUES + ZERO_VALUES)
                    and bool(words & set(ZERO_VALUES if default_kind == "presence" else ONE_VALUES)))
        if not contrary:
            continue
        held = ", ".join(sorted(words))
        if default_kind != "presence":  # a background file: no kind option reaches it
            raise InputError(f"{path}: column '{c}' holds {held}, but every row of a {default_kind} file is read "
                             f"as {default_kind}; give presences and absences in the records file.")
        if named:
            raise InputError(f"{path}: column '{c}' holds {held}; give kind_column='{c}' to read them as kinds, or "
                             f"kind_column='none' to take every row as a {default_kind}.")
        raise InputError(
            f"{path}: column '{c}' holds {held}; give kind_column='{c}' and say what 0 means with zero_means: "
            f"'absence' (surveyed, not found) or 'background'; or kind_column='none' to take every row as a "
            f"{default_kind}.")
    return None


def kind_column_in(columns):
    """The column of ``columns`` read as the kind when none is named (KIND_NAMES, any case), or None."""
    return first_column(columns, KIND_NAMES)


def _warn_several_species(table, kind, path, notes) -> None:
    """A table of several species' presences (a GBIF download of a genus, say) is designed and
    tested as one species; that may be meant, so it is said, not refused."""
    col = first_column(table.columns, SPECIES_NAMES)
    if col is None:
        return
    names = pd.unique(table.loc[kind == "presence", col].astype(str).str.strip())
    names = sorted(n for n in names if n)
    if len(names) > 1:
        shown = ", ".join(names[:3]) + (", ..." if len(names) > 3 else "")
        notes.append(f"warning: {path}: column '{col}' names {len(names)} species among the presences ({shown}); "
                     "they are designed and tested as one; give one species' records per run (splitter batch "
                     "runs many).")


def _kind_text(column: pd.Series) -> pd.Series:
    """Kind values as compared: trimmed, lower case, ``1.0`` as ``1`` (a 0/1 column saved as floats)."""
    return column.astype(str).str.strip().str.lower().str.replace(r"\.0$", "", regex=True)


def _zero_one(table, kind_column) -> bool:
    return kind_column is not None and kind_column in table.columns and \
        _kind_text(table[kind_column]).isin(ZERO_VALUES).any()


def check_zero_means(zero_means) -> str | None:
    if zero_means is None or zero_means in ZERO_MEANS:
        return zero_means
    raise InputError(f"zero_means={zero_means!r}: say what 0 means in the kind column: 'absence' (surveyed, "
                     "not found) or 'background' (not surveyed).")


def _kinds(table, path, kind_column, default_kind, dropped, zero_means=None) -> np.ndarray:
    zero_means = check_zero_means(zero_means)
    col = kind_column
    n = len(table)
    if col is None:
        return np.full(n, default_kind, dtype=object)
    if col not in table.columns:
        raise InputError(f"{path}: no kind column '{col}' (given with --kind-column); columns are: {', '.join(map(str, table.columns))}.")
    raw = _kind_text(table[col])
    zero = raw.isin(ZERO_VALUES).to_numpy()
    if zero.any() and zero_means is None:
        row = int(np.flatnonzero(zero)[0]) + 2
        raise InputError(
            f"{path}: column '{col}' holds 0/1 kinds (row {row}: '{table[col].iloc[row - 2]}'); say what 0 means "
            "with zero_means: 'absence' (a survey: surveyed, not found) or 'background' (not surveyed).")
    values = {**KIND_VALUES, **{v: "presence" for v in ONE_VALUES}, **{v: zero_means for v in ZERO_VALUES}}
    kind = raw.map(values).to_numpy(object)
    unknown = pd.isna(kind)
    if unknown.all():
        vals = ", ".join(sorted(set(raw))[:5])
        raise InputError(
            f"{path}: column '{col}' holds no known kind (found {vals}); use presence, absence or background "
            "(or 1/0 with zero_means)."
        )
    kind[unknown] = "unknown"
    sel = unknown & (dropped == "")
    dropped[sel] = "unknown-kind"
    return kind


def combine(records: Records, other: Records, kind: str | None = None) -> Records:
    """Append ``other``'s rows after ``records``' (e.g. a separate background file).

    Columns are the union (records' columns first); ids of ``other`` are
    prefixed with ``bg-`` when they would clash with the first table's ids.
    """
    if records.points.crs != other.points.crs:
        other_pts = other.points.to_crs(records.points.crs)
    else:
        other_pts = other.points
    other_table = other.table.copy()
    # Give the second file the same coordinate column names so one table results.
    if records.x_column and other.x_column and other.x_column != records.x_column:
        other_table = other_table.rename(columns={other.x_column: records.x_column, other.y_column: records.y_column})
    table = pd.concat([records.table, other_table], ignore_index=True, sort=False)
    for c in table.columns:
        if table[c].dtype == object or pd.api.types.is_string_dtype(table[c]):
            table[c] = table[c].fillna("")
    ids = other.record_id.copy()
    if np.isin(ids, records.record_id).any():
        ids = np.array([f"bg-{i}" for i in ids], dtype=object)
        if np.isin(ids, records.record_id).any():
            raise InputError("The background file's ids clash with the records' ids; give unique ids.")
    okind = other.kind.copy() if kind is None else np.where(other.kind == "unknown", "unknown", kind).astype(object)
    pts = Points(np.r_[records.points.x, other_pts.x], np.r_[records.points.y, other_pts.y], records.points.crs)
    return Records(
        table=table, points=pts,
        record_id=np.r_[records.record_id, ids].astype(object),
        kind=np.r_[records.kind, okind].astype(object),
        dropped=np.r_[records.dropped, other.dropped].astype(object),
        x_column=records.x_column, y_column=records.y_column,
        sources={**records.sources, **other.sources}, notes=records.notes + other.notes,
        zero_means=records.zero_means or other.zero_means,
    )


def append_points(records: Records, points: Points, kind: str, id_prefix: str = "bg-") -> Records:
    """Append generated points (e.g. sampled background) as new rows."""
    pts = points.to_crs(records.points.crs)
    n = len(pts)
    cols = {}
    if records.x_column:
        cols[records.x_column] = [f"{v:.6f}" for v in pts.x]
        cols[records.y_column] = [f"{v:.6f}" for v in pts.y]
    extra = pd.DataFrame(cols)
    table = pd.concat([records.table, extra], ignore_index=True, sort=False)
    for c in table.columns:
        if table[c].dtype == object or pd.api.types.is_string_dtype(table[c]):
            table[c] = table[c].fillna("")
    ids = np.array([f"{id_prefix}{i}" for i in range(1, n + 1)], dtype=object)
    if np.isin(ids, records.record_id).any():
        raise InputError(f"Generated ids '{id_prefix}N' clash with the records' ids; rename those records.")
    return Records(
        table=table,
        points=Points(np.r_[records.points.x, pts.x], np.r_[records.points.y, pts.y], records.points.crs),
        record_id=np.r_[records.record_id, ids].astype(object),
        kind=np.r_[records.kind, np.full(n, kind, dtype=object)].astype(object),
        dropped=np.r_[records.dropped, np.full(n, "", dtype=object)].astype(object),
        x_column=records.x_column, y_column=records.y_column,
        sources=records.sources, notes=records.notes, zero_means=records.zero_means,
    )
