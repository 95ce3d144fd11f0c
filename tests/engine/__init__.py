"""Tests of server/engine."""
