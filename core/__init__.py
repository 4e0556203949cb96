"""Formwise core: pure computation for regressions with transformed variables.

``analyze(data, spec, parts=None)`` is the single entry point (SPEC §2).
"""

from core.analysis import analyze
from core.errors import DataError, FormwiseError, SpecError

__all__ = ["analyze", "FormwiseError", "SpecError", "DataError"]
