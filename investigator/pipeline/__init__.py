"""The scan from end to end: options, fitting and scoring every method, combination and the flag rule,
kinds of normal applied, stability, approximations on large data, reference mode, the scan model and the
Dask path, and ScanResult, the one object a scan returns."""
