"""Design studies built on runs: climate envelopes, refinement studies, calibration, and the
engines that run many cases (local processes or a Dask cluster)."""
