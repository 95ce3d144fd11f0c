"""Tests of server/quality."""
