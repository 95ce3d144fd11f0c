"""Tests of server/api."""
