"""Performance benchmarks (not collected by pytest): ``python -m tests.benchmarks.perf``."""
