"""Production lots: many parts graded against one nominal on Dask distributed, as one task each
(task), collected from files, folders and listings (parts), kept per part as they arrive (store),
tabulated one row per part, seam and order (table), and reviewed on the lot page (control, charts,
page). run.run_lot ties them together."""
