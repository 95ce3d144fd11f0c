"""Helpers shared by tests (no fixtures here; those live in conftest.py)."""
