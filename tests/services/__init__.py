"""Tests of server/services."""
