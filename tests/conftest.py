"""Shared fixtures: small invented record sets written to temporary files."""

from __future__ import annotations

import numpy as np
import pytest


def write_records_csv(path, n_presence=240, n_background=160, seed=0, lon0=12.0, lat0=45.0,
                      spread=(1.5, 1.0), extra_rows=()):
    """An invented record table with clustered presences and uniform background."""
    rng = np.random.default_rng(seed)
    centres = rng.normal([lon0, lat0], spread, size=(8, 2))
    pick = rng.integers(0, 8, n_presence)
    lon_p = centres[pick, 0] + rng.normal(0, 0.25, n_presence)
    lat_p = centres[pick, 1] + rng.normal(0, 0.2, n_presence)
    lon_b = rng.uniform(lon0 - 3, lon0 + 3, n_background)
    lat_b = rng.uniform(lat0 - 2, lat0 + 2, n_background)
    lines = ["record_id,longitude,latitude,kind,method,note"]
    for i in range(n_presence):
        m = "transect" if lon_p[i] < lon0 else "trap"
        lines.append(f"p{i + 1},{lon_p[i]:.5f},{lat_p[i]:.5f},presence,{m},x{i % 7}")
    for i in range(n_background):
        lines.append(f"b{i + 1},{lon_b[i]:.5f},{lat_b[i]:.5f},background,,")
    lines.extend(extra_rows)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.fixture
def records_csv(tmp_path):
    return write_records_csv(tmp_path / "records.csv")
