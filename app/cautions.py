"""The Cautions section under the results: what the numbers can and cannot say.

The wording is the report's (``core.analysis.CAUTIONS`` via the result, and
``core.output.report.CAUTION_REVIEW``), so the screen and the HTML report say the same; small samples
get their own line here and there.
"""

from __future__ import annotations

from typing import Any

import streamlit as st

from core.output.escape import plain
from core.output.report import CAUTION_REVIEW
from core.output.text import small_sample_lines


def sample_lines(result: dict[str, Any]) -> list[str]:
    """A line when the sample is small (``core.output.text.small_sample_lines``)."""
    return small_sample_lines(result.get("n_obs") or 0, len(result.get("terms") or []) or None)


def lines(result: dict[str, Any]) -> list[str]:
    """Every caution for this result, in the report's words."""
    return [
        *(result.get("cautions") or []),
        "R² is measured on the scale of the outcome as transformed, so it cannot be compared between a log and a "
        "level outcome; the Compare view uses measures on the original scale.",
        *sample_lines(result),
        CAUTION_REVIEW,
    ]


def section(result: dict[str, Any]) -> None:
    """The visible Cautions box; small-sample lines stand out as warnings."""
    small = set(sample_lines(result))
    with st.container(border=True, key="cautions"):
        st.markdown("##### Cautions")
        for line in lines(result):
            if line in small:
                st.warning(plain(line), icon=":material/warning:")
            else:
                st.markdown(f"- {plain(line)}")
