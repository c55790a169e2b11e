"""Many runs at once: Monte Carlo, sensitivities, batches, and the executors that run them
(in-process, a local process pool, or a Dask cluster)."""
