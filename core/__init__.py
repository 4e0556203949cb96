"""Formwise core: pure computation for regressions with transformed variables.

``analyze(data, spec, parts=None)`` is the single entry point (docs/contract.md §1); a ``ColumnCache``
passed as ``columns=`` lets the refits of an edit loop reuse converted and transformed columns.
"""

from core.analysis import analyze
from core.errors import DataError, FormwiseError, SpecError
from core.intake.advisor import suggest, suggest_with_notes
from core.model.design import ColumnCache
from core.model.memory import keep_freed_memory

keep_freed_memory()

__all__ = ["analyze", "suggest", "suggest_with_notes", "ColumnCache", "FormwiseError", "SpecError", "DataError"]
