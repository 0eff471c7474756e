"""The results store: metadata (names, zarr.json, records), writer (template, blocks), reader, and the
tools on whole stores (summary, catalog, merge, verify, export, off-grid points). Takes plans from
:mod:`sweepshell.plan`; never imports the engine, config or anything above."""
