"""Finding a column a user named: exactly, else in another case when only one column
matches. Coordinates, kinds, ids, groups and times are all found this way, so that a
table exported as ``Year``, ``Method`` or ``Record_ID`` needs no renaming."""

from __future__ import annotations

from splitter.errors import InputError

__all__ = ["match_column", "first_column", "find_column"]


def match_column(columns, name) -> object | None:
    """``name`` if it is a column, else the one column equal to it in another case
    (spaces around ignored); None when there is none or more than one.

    Examples
    --------
    >>> match_column(["Year", "Method"], "year"), match_column(["year", "Year"], "YEAR")
    ('Year', None)
    """
    columns = list(columns)
    if name in columns:
        return name
    hits = [c for c in columns if str(c).strip().lower() == str(name).strip().lower()]
    return hits[0] if len(hits) == 1 else None


def first_column(columns, names) -> object | None:
    """The column :func:`match_column` finds for the first of ``names`` that has one, or None
    (the usual spellings of a column, tried in order).

    Examples
    --------
    >>> first_column(["ID", "Lat", "Lon"], ("longitude", "lon", "x"))
    'Lon'
    """
    columns = list(columns)
    return next((c for c in (match_column(columns, n) for n in names) if c is not None), None)


def find_column(table, name: str, parameter: str, alternatives=()) -> str:
    """The column :func:`match_column` finds for ``name``, else for the first of
    ``alternatives`` that matches; else an InputError naming ``parameter`` and the
    columns there are.

    Examples
    --------
    >>> import pandas as pd
    >>> find_column(pd.DataFrame(columns=["Year", "Method"]), "year", "time_column")
    'Year'
    >>> find_column(pd.DataFrame(columns=["eventDate"]), "year", "time_column", ("eventDate", "date"))
    'eventDate'
    """
    found = first_column(table.columns, (name, *alternatives))
    if found is not None:
        return found
    cols = ", ".join(map(str, table.columns))
    tried = f" (nor {', '.join(map(str, alternatives))})" if alternatives else ""
    raise InputError(f"{parameter}={name!r}: no such column{tried}; columns are: {cols}.")
