"""One 2D pattern larger than one process: exact summaries computed tile by tile.

``sources`` reads points in chunks (.npy memory-mapped, HDF5, Parquet,
generated CSR); ``tiling`` cuts the window into tiles and spills each tile's
points to disk; ``local`` computes a tile's certified share; ``merge``
assembles the whole pattern's summaries; ``run`` drives it on processes or a
Dask cluster (:func:`~nullatlas.lookup.tiled.run.tiled_statistics`);
``instant`` tests the result against the null tables.
"""
