"""Reading and writing: records, rasters, fold tables; every output written atomically."""
