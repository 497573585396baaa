"""Images with known truth (exact-coverage scans, mat photos) for tests and benchmarks."""
