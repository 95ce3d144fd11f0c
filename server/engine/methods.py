"""Imports every module that registers a method, so that the registry is complete."""

from server.engine import atterberg  # noqa: F401
from server.engine import classification_methods  # noqa: F401
from server.engine import grading_methods  # noqa: F401
from server.engine import strength_methods  # noqa: F401
