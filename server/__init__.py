"""Claybench: index testing for a soils laboratory, from bench readings to certified reports."""

__version__ = "0.1.0"
