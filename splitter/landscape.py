"""The invented demo scenario: a synthetic landscape, an invented beetle and its records.

Nothing here is real. The region (the "Korvandel Basin"), its towns, roads and field
stations, and the species (the "amber marsh lantern beetle") are made up; the grid is laid
over open North Atlantic ocean (longitude 44 W to 32 W, latitude 40 N to 50 N) so that it
cannot be mistaken for a real place. Everything is drawn from a seeded generator and
written byte-identically on every run, so the demo, the tutorials and the tests all see
the same data.

What is known by construction (and written to ``truth.json``):

* three covariates on a 0.05 degree grid, each a stationary Gaussian random field with a
  known covariance model and effective range (80, 150 and 40 km), simulated in a Lambert
  azimuthal equal-area plane centred on the region so ranges are true kilometres;
* a ragged "sea" of nodata cells along the eastern edge;
* the species' niche: a Gaussian response to temperature and moisture (canopy has no
  effect), so records should be warmer and wetter than the background;
* two survey methods with different spatial footprints: ``transect`` records follow the
  road network, ``light-trap`` records cluster around five field stations; the chance of a
  record in a cell is proportional to suitability x survey effort x cell area.

Run ``python -m splitter.landscape OUT_DIR`` to regenerate the bundled ``demo_data``.
"""

from __future__ import annotations

import argparse
import hashlib
import io
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from splitter.errors import InputError
from splitter.io.atomic import atomic_write
from splitter.io.journal import make_folder
from splitter.synthetic import gaussian_field

__all__ = [
    "DEFAULT_SEED",
    "REGION",
    "Landscape",
    "DemoFiles",
    "build_landscape",
    "make_demo_data",
    "main",
]

DEFAULT_SEED = 20261202

#: The invented region: a 240 x 200 grid of 0.05 degree cells (EPSG:4326).
REGION = {
    "name": "Korvandel Basin",
    "crs": "EPSG:4326",
    "west": -44.0,
    "east": -32.0,
    "south": 40.0,
    "north": 50.0,
    "cell_deg": 0.05,
    "width": 240,
    "height": 200,
}

NODATA = -9999.0

# Spacing (km) of the equal-area grid the fields are simulated on before they are sampled
# at the centres of the geographic cells (0.05 degree is 3.2 to 5.6 km here); nearest-node
# sampling moves a point by at most 1.4 km, negligible against ranges of 40 km and more.
_FINE_KM = 2.0

# Mean Earth radius (km) used for the sea mask's east-west distances and cell areas.
_EARTH_KM = 6371.0088

_COVARIATES = {
    "temperature": {
        "units": "degrees C (mean annual, invented)",
        "model": "exponential",
        "effective_range_km": 80.0,
        "sd": 2.0,
        "trend": "14 - 0.4 * (latitude - 40): 14 C on the southern edge, 10 C on the northern",
    },
    "moisture": {
        "units": "percent soil moisture (invented)",
        "model": "exponential",
        "effective_range_km": 150.0,
        "sd": 6.0,
        "mean": 30.0,
    },
    "canopy": {
        "units": "percent canopy cover (invented), clipped to 0-100",
        "model": "exponential",
        "effective_range_km": 40.0,
        "sd": 12.0,
        "mean": 55.0,
    },
}

_NICHE = {
    "form": "suitability = exp(-(T - 14)^2 / (2 * 2^2) - (M - 38)^2 / (2 * 6^2)); canopy has no effect",
    "temperature_optimum": 14.0,
    "temperature_tolerance_sd": 2.0,
    "moisture_optimum": 38.0,
    "moisture_tolerance_sd": 6.0,
    "canopy": "no effect",
}

# Invented settlements (lon, lat) and the roads between them.
_TOWNS = {
    "Tallowmere": (-41.6, 47.9),
    "Quillby": (-38.2, 48.6),
    "Fenwatch": (-42.3, 43.1),
    "Dunmarrow": (-39.4, 45.2),
    "Saltreach": (-35.6, 44.0),
    "Orrinford": (-37.0, 41.4),
    "Brackwell": (-35.9, 48.9),
}
_ROADS = [
    ("Tallowmere", "Quillby"),
    ("Tallowmere", "Dunmarrow"),
    ("Fenwatch", "Dunmarrow"),
    ("Dunmarrow", "Saltreach"),
    ("Dunmarrow", "Orrinford"),
    ("Quillby", "Brackwell"),
    ("Quillby", "Dunmarrow"),
    ("Fenwatch", "Orrinford"),
]
# Invented field stations that run light traps.
_STATIONS = {
    "Greylock Moss station": (-43.0, 45.8),
    "Hollin Carr station": (-40.4, 42.2),
    "Mirefield station": (-37.6, 46.7),
    "Sedgecombe station": (-34.6, 42.6),
    "Rookwater station": (-40.0, 49.2),
}

_METHODS = {
    "transect": {
        "records": 280,
        "years": [2011, 2024],
        "effort": "0.02 + exp(-d_road / 12 km): walked transects along the road network",
    },
    "light-trap": {
        "records": 150,
        "years": [2018, 2024],
        "effort": "0.01 + sum over stations of exp(-d^2 / (2 * (35 km)^2)): traps near five field stations",
    },
}
_N_BACKGROUND = 2000

_COLUMNS = ["record_id", "longitude", "latitude", "kind", "method", "year"]


@dataclass(frozen=True)
class Landscape:
    """The generated scenario, in memory.

    Attributes
    ----------
    rasters : dict of str to ndarray
        ``temperature``, ``moisture``, ``canopy``: float32 arrays of shape (200, 240), rows
        from north to south, ``NODATA`` on sea cells.
    valid : ndarray of bool
        True on land cells (the cells with data in every raster).
    transform : tuple
        GDAL-style affine ``(west, cell, 0, north, 0, -cell)``.
    presences, background : pandas.DataFrame
        Records with columns ``record_id, longitude, latitude, kind, method, year``.
    truth : dict
        Everything known by construction (written to ``truth.json``).
    """

    rasters: dict
    valid: np.ndarray
    transform: tuple
    presences: pd.DataFrame
    background: pd.DataFrame
    truth: dict = field(repr=False)

    def to_dict(self) -> dict:
        """Return the ground truth as a plain dictionary."""
        return json.loads(json.dumps(self.truth))


@dataclass(frozen=True)
class DemoFiles:
    """Paths written by :func:`make_demo_data`, with the SHA-256 of each file."""

    out_dir: Path
    files: dict
    sha256: dict

    def to_dict(self) -> dict:
        return {"out_dir": str(self.out_dir), "files": {k: str(v) for k, v in self.files.items()},
                "sha256": dict(self.sha256)}


def _laea_km(lon: np.ndarray, lat: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Project lon/lat to km in a Lambert azimuthal equal-area plane centred on the region."""
    from pyproj import Transformer

    lon0 = (REGION["west"] + REGION["east"]) / 2
    lat0 = (REGION["south"] + REGION["north"]) / 2
    transformer = Transformer.from_crs(
        "EPSG:4326",
        f"+proj=laea +lat_0={lat0} +lon_0={lon0} +x_0=0 +y_0=0 +ellps=WGS84 +units=m +no_defs",
        always_xy=True,
    )
    x, y = transformer.transform(lon, lat)
    return np.asarray(x) / 1000.0, np.asarray(y) / 1000.0


def _segment_distance(px, py, ax, ay, bx, by) -> np.ndarray:
    """Distance (km) from each point to the nearest of several segments; (points,) result."""
    px, py = px[:, None], py[:, None]
    dx, dy = bx - ax, by - ay
    t = np.clip(((px - ax) * dx + (py - ay) * dy) / (dx * dx + dy * dy), 0.0, 1.0)
    return np.hypot(px - (ax + t * dx), py - (ay + t * dy)).min(axis=1)


def _jitter_in_cells(rng, rows, cols, by_area: bool) -> tuple[np.ndarray, np.ndarray]:
    """Random positions inside the given cells, kept 0.1 % of a cell away from the edges.

    With ``by_area`` the latitude is uniform in sin(latitude), i.e. uniform by area.
    The margin keeps points inside their cell after rounding to 5 decimals (1.1 m).
    """
    cell = REGION["cell_deg"]
    u = rng.uniform(0.001, 0.999, size=(2, rows.size))
    lon = REGION["west"] + (cols + u[0]) * cell
    top = REGION["north"] - rows * cell
    bottom = top - cell
    if by_area:
        s_top, s_bottom = np.sin(np.radians(top)), np.sin(np.radians(bottom))
        lat = np.degrees(np.arcsin(s_bottom + u[1] * (s_top - s_bottom)))
    else:
        lat = bottom + u[1] * cell
    return np.round(lon, 5), np.round(lat, 5)


def build_landscape(seed: int = DEFAULT_SEED) -> Landscape:
    """Generate the invented scenario in memory (no files are touched).

    Parameters
    ----------
    seed : int
        Seed of the ``numpy.random.Generator`` all randomness is drawn from.

    Returns
    -------
    Landscape

    Examples
    --------
    >>> from splitter.landscape import build_landscape
    >>> land = build_landscape()
    >>> land.rasters["temperature"].shape
    (200, 240)
    """
    try:
        seed = int(seed)
    except (TypeError, ValueError):
        raise InputError(f"seed must be an integer, got {seed!r}.") from None
    if seed < 0:
        raise InputError(f"seed must be a non-negative integer, got {seed}.")
    streams = np.random.SeedSequence(seed).spawn(8)
    height, width, cell = REGION["height"], REGION["width"], REGION["cell_deg"]

    # Cell centres, rows from north to south (GeoTIFF order).
    lon_c = REGION["west"] + (np.arange(width) + 0.5) * cell
    lat_c = REGION["north"] - (np.arange(height) + 0.5) * cell
    lon_g, lat_g = np.meshgrid(lon_c, lat_c)
    x_km, y_km = _laea_km(lon_g.ravel(), lat_g.ravel())

    # One equal-area fine grid covering every cell centre; each field is simulated there.
    x0, y0 = x_km.min() - _FINE_KM, y_km.min() - _FINE_KM
    ix = np.rint((x_km - x0) / _FINE_KM).astype(int)
    iy = np.rint((y_km - y0) / _FINE_KM).astype(int)
    fine_shape = (int(iy.max()) + 2, int(ix.max()) + 2)

    def field_at_cells(name: str, stream) -> np.ndarray:
        spec = _COVARIATES[name]
        z = gaussian_field(fine_shape, _FINE_KM, spec["effective_range_km"], seed=stream,
                           model=spec["model"], mean=0.0, sd=spec["sd"])
        return z[iy, ix].reshape(height, width)

    temperature = 14.0 - 0.4 * (lat_g - REGION["south"]) + field_at_cells("temperature", streams[0])
    moisture = _COVARIATES["moisture"]["mean"] + field_at_cells("moisture", streams[1])
    canopy = np.clip(_COVARIATES["canopy"]["mean"] + field_at_cells("canopy", streams[2]), 0.0, 100.0)

    # Ragged sea along the eastern edge: the coast lies a varying distance west of the edge,
    # a smooth 1-D field (long bays and headlands) plus a rough one (small coves).
    row_km = cell * np.pi / 180.0 * _EARTH_KM
    coast_km = (
        80.0
        + gaussian_field(height, row_km, 250.0, seed=streams[3], model="gaussian", sd=30.0)
        + gaussian_field(height, row_km, 20.0, seed=streams[4], model="exponential", sd=8.0)
    )
    coast_km = np.clip(coast_km, 15.0, None)
    east_km = (REGION["east"] - lon_g) * np.pi / 180.0 * _EARTH_KM * np.cos(np.radians(lat_g))
    valid = east_km >= coast_km[:, None]

    # True area of each cell on the sphere (proportional to the band of sin(latitude)).
    area = (np.sin(np.radians(lat_g + cell / 2)) - np.sin(np.radians(lat_g - cell / 2)))
    area = area * np.radians(cell) * _EARTH_KM**2

    suit = np.exp(
        -((temperature - _NICHE["temperature_optimum"]) ** 2) / (2 * _NICHE["temperature_tolerance_sd"] ** 2)
        - ((moisture - _NICHE["moisture_optimum"]) ** 2) / (2 * _NICHE["moisture_tolerance_sd"] ** 2)
    )

    names = list(_TOWNS)
    town_x, town_y = _laea_km(np.array([_TOWNS[n][0] for n in names]), np.array([_TOWNS[n][1] for n in names]))
    a = np.array([names.index(r[0]) for r in _ROADS])
    b = np.array([names.index(r[1]) for r in _ROADS])
    d_road = _segment_distance(x_km, y_km, town_x[a], town_y[a], town_x[b], town_y[b]).reshape(height, width)
    st_x, st_y = _laea_km(np.array([v[0] for v in _STATIONS.values()]), np.array([v[1] for v in _STATIONS.values()]))
    d2_station = (x_km[:, None] - st_x) ** 2 + (y_km[:, None] - st_y) ** 2
    effort = {
        "transect": 0.02 + np.exp(-d_road / 12.0),
        "light-trap": 0.01 + np.exp(-d2_station / (2 * 35.0**2)).sum(axis=1).reshape(height, width),
    }

    rng = np.random.default_rng(streams[5])
    parts = []
    for method, spec in _METHODS.items():
        weight = np.where(valid, suit * effort[method] * area, 0.0).ravel()
        # Several records may fall in one cell, as in real survey data.
        chosen = rng.choice(weight.size, size=spec["records"], replace=True, p=weight / weight.sum())
        rows, cols = np.divmod(chosen, width)
        lon, lat = _jitter_in_cells(rng, rows, cols, by_area=False)
        years = rng.integers(spec["years"][0], spec["years"][1] + 1, size=spec["records"])
        parts.append(pd.DataFrame({"longitude": lon, "latitude": lat, "method": method, "year": years}))
    presences = pd.concat(parts, ignore_index=True)
    presences = presences.iloc[rng.permutation(len(presences))].reset_index(drop=True)
    presences.insert(0, "record_id", np.arange(1, len(presences) + 1))
    presences.insert(3, "kind", "presence")
    presences["year"] = presences["year"].astype("Int64")

    bg_rng = np.random.default_rng(streams[6])
    weight = np.where(valid, area, 0.0).ravel()
    chosen = bg_rng.choice(weight.size, size=_N_BACKGROUND, replace=True, p=weight / weight.sum())
    rows, cols = np.divmod(chosen, width)
    lon, lat = _jitter_in_cells(bg_rng, rows, cols, by_area=True)
    background = pd.DataFrame({
        "record_id": np.arange(len(presences) + 1, len(presences) + _N_BACKGROUND + 1),
        "longitude": lon,
        "latitude": lat,
        "kind": "background",
        "method": pd.Series([pd.NA] * _N_BACKGROUND, dtype="string"),
        "year": pd.Series([pd.NA] * _N_BACKGROUND, dtype="Int64"),
    })

    rasters = {}
    for name, values in (("temperature", temperature), ("moisture", moisture), ("canopy", canopy)):
        rasters[name] = np.where(valid, values, NODATA).astype(np.float32)

    truth = {
        "scenario": "invented; no real species, place or person",
        "seed": seed,
        "region": {**REGION, "land_cells": int(valid.sum()), "sea_cells": int((~valid).sum()),
                   "nodata": NODATA,
                   "sea": "ragged strip along the eastern edge, 15 km wide or more"},
        "simulation": {
            "method": "circulant embedding (exact covariance), splitter.synthetic.gaussian_field",
            "plane": "Lambert azimuthal equal-area, centre 38 W 45 N, WGS84",
            "grid_km": _FINE_KM,
            "range_convention": "effective range: the distance at which correlation is 0.05",
        },
        "covariates": {name: {"file": f"{name}.tif", **spec} for name, spec in _COVARIATES.items()},
        "niche": dict(_NICHE),
        "sampling": {
            "record_probability": "proportional to suitability x survey effort x cell area, land cells only",
            "methods": {m: dict(s) for m, s in _METHODS.items()},
            "towns": {n: list(v) for n, v in _TOWNS.items()},
            "roads": [list(r) for r in _ROADS],
            "stations": {n: list(v) for n, v in _STATIONS.items()},
        },
        "background": {"points": _N_BACKGROUND, "sampling": "uniform by area over land cells"},
        "records": {"presences": int(len(presences)), "background": _N_BACKGROUND},
    }
    return Landscape(
        rasters=rasters,
        valid=valid,
        transform=(REGION["west"], cell, 0.0, REGION["north"], 0.0, -cell),
        presences=presences[_COLUMNS],
        background=background[_COLUMNS],
        truth=truth,
    )


def _csv_bytes(frame: pd.DataFrame) -> bytes:
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False, lineterminator="\n", float_format="%.5f", na_rep="")
    return buffer.getvalue().encode("utf-8")


def _readme(truth: dict) -> str:
    cov = truth["covariates"]
    meth = truth["sampling"]["methods"]
    region = truth["region"]
    rows = "\n".join(
        f"| `{c['file']}` | {c['units']} | {c['model']} | {c['effective_range_km']:g} | {c['sd']:g} |"
        for c in cov.values()
    )
    towns = ", ".join(truth["sampling"]["towns"])
    stations = ", ".join(truth["sampling"]["stations"])
    roads = ", ".join(f"{a}-{b}" for a, b in truth["sampling"]["roads"])
    return f"""# Demo data: the amber marsh lantern beetle in the Korvandel Basin

**Everything here is synthetic: no real species, place or person.** The Korvandel Basin,
its towns, roads and field stations, and the amber marsh lantern beetle are invented. The
grid is laid over open North Atlantic ocean ({-region['west']:g} W to {-region['east']:g} W,
{region['south']:g} N to {region['north']:g} N) so that it cannot be taken for a real place.
Use these data only to try `splitter` out.

Generated by `python -m splitter.landscape demo_data` (seed {truth['seed']}); every run
writes byte-identical files. The ground truth is in `truth.json`.

## Files

| file | what |
| --- | --- |
| `temperature.tif`, `moisture.tif`, `canopy.tif` | covariates: EPSG:4326, {region['width']} x {region['height']} cells of {region['cell_deg']:g} degree, float32, deflate, nodata {region['nodata']:g} on the sea |
| `records.csv` | {truth['records']['presences']} presence records of the beetle |
| `background.csv` | {truth['records']['background']} background points, uniform by area over land cells (`method` and `year` empty) |
| `records_with_background.csv` | both stacked; the `kind` column tells them apart |
| `truth.json` | everything known by construction |

Every CSV has the columns `record_id, longitude, latitude, kind, method, year`. Coordinates
are WGS84 degrees rounded to 5 decimals; `record_id` is unique across the stacked file.

## Landscape

Land covers {region['land_cells']} cells. A ragged strip of {region['sea_cells']} sea cells
along the eastern edge is nodata in every raster.

Each covariate is a stationary Gaussian random field with a known covariance model,
simulated exactly (circulant embedding) on a {truth['simulation']['grid_km']:g} km grid in a
Lambert azimuthal equal-area plane centred on the region, then sampled at the cell centres,
so the ranges below are true kilometres. The **effective range** is the distance at which
the correlation falls to 0.05.

| raster | units | covariance model | effective range (km) | sd of the field |
| --- | --- | --- | --- | --- |
{rows}

- Temperature also has a south-to-north trend: {cov['temperature']['trend']}.
  The trend adds to the semivariance at long lags, so a variogram fitted to temperature
  gives a somewhat longer range than the 80 km of its random part.
- Moisture has mean {cov['moisture']['mean']:g}; canopy has mean {cov['canopy']['mean']:g}
  (clipped to 0-100).

The region is about 1000 km east-west by 1100 km north-south, so spatial blocks of about
50-150 km (larger than the ranges, by common practice) still give tens of blocks to share
among folds.

## The species and its records

The beetle's niche is a Gaussian response to temperature (T) and moisture (M):

    {truth['niche']['form']}

It favours warm, wet cells, so its records are warmer and wetter than the background.
Canopy carries no signal: it is a decoy covariate.

The chance that a record falls in a cell is proportional to suitability x survey effort x
cell area (land cells only). The two survey methods have different footprints, so holding
out one method tests transfer to places the other did not survey:

| method | records | years | survey effort |
| --- | --- | --- | --- |
| `transect` | {meth['transect']['records']} | {meth['transect']['years'][0]}-{meth['transect']['years'][1]} | {meth['transect']['effort']} |
| `light-trap` | {meth['light-trap']['records']} | {meth['light-trap']['years'][0]}-{meth['light-trap']['years'][1]} | {meth['light-trap']['effort']} |

Invented towns: {towns}. Roads join {roads}.
Invented field stations: {stations}.
Several records can share a cell, as in real survey data.

## Place that no covariate carries

Survey effort is spatially structured and no covariate carries it: transect records follow
the roads and light-trap records gather around the stations, while the background is uniform
over land. A model given the coordinates as well as the covariates can therefore learn where
records were collected, not only where the beetle can live. A random split rewards that (its
evaluation records lie beside its calibration records); spatial blocks do not. The demo
measures the difference with one gradient-boosting model fitted under both splits
(`optimism.csv` and the appendix section "The same model under both splits"). No other
spatial signal was added to produce the effect: it comes from the survey footprints above.
"""

def _geotiff_bytes(values: np.ndarray, transform: tuple, name: str, units: str) -> bytes:
    """Encode one band as a GeoTIFF in memory with a fixed profile (no timestamps)."""
    import rasterio
    from rasterio.io import MemoryFile
    from rasterio.transform import Affine

    west, cell, _, north, _, neg_cell = transform
    profile = {
        "driver": "GTiff",
        "dtype": "float32",
        "count": 1,
        "height": values.shape[0],
        "width": values.shape[1],
        "crs": rasterio.crs.CRS.from_epsg(4326),
        "transform": Affine(cell, 0.0, west, 0.0, neg_cell, north),
        "nodata": NODATA,
        "compress": "deflate",
        "predictor": 3,
        "tiled": False,
        "interleave": "band",
    }
    with MemoryFile() as memfile:
        with memfile.open(**profile) as dst:
            dst.write(values, 1)
            dst.set_band_description(1, name)
            dst.update_tags(1, units=units)
            dst.update_tags(source="synthetic; splitter.landscape (invented scenario)")
        return memfile.read()


def make_demo_data(out_dir, seed: int = DEFAULT_SEED) -> DemoFiles:
    """Write the invented demo scenario to ``out_dir``, byte-identically on every run.

    Files: ``temperature.tif``, ``moisture.tif``, ``canopy.tif``, ``records.csv``,
    ``background.csv``, ``records_with_background.csv``, ``truth.json``, ``README.md``.
    Each is written to a temporary file and renamed, so an interrupted run leaves no
    half-written file.

    Parameters
    ----------
    out_dir : str or path-like
        Directory to write to (created if missing).
    seed : int
        Seed of the scenario; the bundled data use ``DEFAULT_SEED``.

    Returns
    -------
    DemoFiles

    Examples
    --------
    >>> import tempfile
    >>> from splitter.landscape import make_demo_data
    >>> written = make_demo_data(tempfile.mkdtemp())
    >>> sorted(written.files)[:3]
    ['README.md', 'background.csv', 'canopy.tif']
    """
    land = build_landscape(seed)
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out} exists and is not a directory; give a directory for the demo data.")
    make_folder(out)

    blobs = {}
    for name, values in land.rasters.items():
        blobs[f"{name}.tif"] = _geotiff_bytes(values, land.transform, name, _COVARIATES[name]["units"])
    blobs["records.csv"] = _csv_bytes(land.presences)
    blobs["background.csv"] = _csv_bytes(land.background)
    stacked = pd.concat([land.presences, land.background], ignore_index=True)
    blobs["records_with_background.csv"] = _csv_bytes(stacked)
    blobs["truth.json"] = (json.dumps(land.truth, indent=2, sort_keys=True) + "\n").encode("utf-8")
    blobs["README.md"] = _readme(land.truth).encode("utf-8")

    files, digests = {}, {}
    for name in sorted(blobs):
        path = out / name
        with atomic_write(path, "wb") as f:
            f.write(blobs[name])
        files[name] = path
        digests[name] = hashlib.sha256(blobs[name]).hexdigest()
    return DemoFiles(out_dir=out, files=files, sha256=digests)


def main(argv=None) -> int:
    """Command-line entry point: ``python -m splitter.landscape OUT_DIR [--seed N]``."""
    parser = argparse.ArgumentParser(
        prog="python -m splitter.landscape",
        description="Write the invented demo scenario (rasters, records, background, truth).",
    )
    parser.add_argument("out_dir", help="directory to write the demo data to")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help=f"scenario seed (default {DEFAULT_SEED})")
    args = parser.parse_args(argv)
    try:
        written = make_demo_data(args.out_dir, seed=args.seed)
    except InputError as exc:
        parser.exit(2, f"error: {exc}\n")
    for name, path in written.files.items():
        print(f"{path}  {written.sha256[name][:12]}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
