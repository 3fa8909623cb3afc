"""Read a job's records as the design step expects them: records, background, sampled background.

Shared by the command line and the batch runner, so a manifest row and the
single ``splitter design`` command read the same file the same way.
"""

from __future__ import annotations


def load_records(records, *, x=None, y=None, crs=None, id_column=None, kind_column=None, background=None,
                 background_count=None, env=(), region=None, seed=0, zero_means=None):
    """Records, plus a separate background file and/or ``background_count`` sampled background points.

    Parameters
    ----------
    records : path
        Occurrence records (CSV, GeoPackage, GeoParquet, ...).
    x, y, crs, id_column, kind_column, zero_means : str, optional
        How to read the table (see :func:`splitter.io.records.read_records`).
    background : path, optional
        A separate file of background points, read with the same columns and CRS.
    background_count : int, optional
        Background points to sample (seeded) over the valid cells of ``env`` or over ``region``.
    env : sequence of paths
        Covariate rasters (for ``background_count``).
    region : path, optional
        Polygon file of the study region (for ``background_count``).
    seed : int
        Seed of the background sample.

    Returns
    -------
    splitter.io.records.Records

    Examples
    --------
    >>> recs = load_records("demo_data/records.csv")
    >>> sorted(set(recs.kind))
    ['presence']
    """
    from splitter.io.records import combine, read_records

    recs = read_records(records, x=x, y=y, crs=crs, id_column=id_column, kind_column=kind_column,
                        zero_means=zero_means)
    if background is not None:
        bg = read_records(background, x=x, y=y, crs=crs, id_column=id_column, default_kind="background")
        recs = combine(recs, bg, kind="background")
    if background_count:
        from splitter.workflow.design import add_background

        recs = add_background(recs, int(background_count), env=list(env), region=region, seed=seed)
    return recs
