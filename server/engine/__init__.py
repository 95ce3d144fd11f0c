"""The index engine: pure computation of soil test results, quality flags and refusals.

Nothing here imports a database, web framework, template or file code; it is the only place
where a soil formula lives. Web pages, the JSON API, the CLI and reports all call
``evaluate``/``calculate`` with a method id and plain JSON readings (DESIGN.md section 3).
Importing this package registers every method.
"""

from server.engine import methods as _methods  # noqa: F401  (registers the methods)
from server.engine.contract import METHODS, Evaluation, Flag, InputError, calculate, evaluate
from server.engine.readings import FieldError

__all__ = ["METHODS", "Evaluation", "FieldError", "Flag", "InputError", "calculate", "evaluate"]
