"""Tests of server/workflow."""
