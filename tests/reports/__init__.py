"""Tests of server/reports."""
