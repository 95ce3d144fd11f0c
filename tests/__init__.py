"""Claybench tests: a mirror of server/, plus whole-path, CLI and code-quality tests."""
