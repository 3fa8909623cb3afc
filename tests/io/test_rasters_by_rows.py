import numpy as np
from rasterio.transform import from_origin

from splitter.io.rasters import write_geotiff, write_geotiff_by_rows


def test_window_by_window_writing_gives_the_same_file(tmp_path):
    rng = np.random.default_rng(0)
    data = rng.random((700, 300)).astype(np.float32)
    data[rng.random(data.shape) < 0.1] = np.nan
    tr = from_origin(10.0, 50.0, 0.01, 0.01)
    write_geotiff(tmp_path / "whole.tif", data, tr, "EPSG:4326")
    seen = []

    def compute(w):
        seen.append(w.height)
        return data[w.row_off:w.row_off + w.height, w.col_off:w.col_off + w.width]

    write_geotiff_by_rows(tmp_path / "rows.tif", 300, 700, tr, "EPSG:4326", compute, rows_per_window=256)
    assert seen == [256, 256, 188]  # whole tile rows, one read per window
    # reference: the in-memory writer's bytes (same GDAL profile, same values)
    assert (tmp_path / "rows.tif").read_bytes() == (tmp_path / "whole.tif").read_bytes()
