"""Benchmark scripts (run by hand or in CI as a smoke run; not collected by pytest)."""
