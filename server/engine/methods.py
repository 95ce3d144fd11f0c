"""Imports every module that registers a method, so that the registry is complete."""

from server.engine import (
    atterberg,  # noqa: F401
    bulk_density,  # noqa: F401
    classification_methods,  # noqa: F401
    compaction,  # noqa: F401
    grading_methods,  # noqa: F401
    organic_content,  # noqa: F401
    particle_density,  # noqa: F401
    shrinkage,  # noqa: F401
    strength_methods,  # noqa: F401
)
