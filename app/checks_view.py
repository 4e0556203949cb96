"""The residual checks view: what the tests say, the residuals, the outcome's power, the
variables as transformed, entangled regressors and influential rows."""

from __future__ import annotations

from typing import Any

import pandas as pd
import streamlit as st

from app import charts, exports, keys, tables
from app.context import CHECK_PARTS, Context, chart
from core.output import display
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.numbers import sig
from core.output.text import (
    boxcox_headline,
    boxcox_sentence,
    check_verdicts,
    showing_words,
    skew_words,
)

# --- residual checks ----------------------------------------------------------------------------------------
# Width of a check's chart in its card: the main column less the card's padding at a 1280 px
# window (measured in Chromium: the column is 820 px wide there, 980 px at 1440 px).
CARD_CHART = 780


def checks_view(ctx: Context) -> None:
    spec = ctx.spec
    if ctx.ppml:
        st.info(
            "These checks test the assumptions of least squares (constant spread, normal residuals). PPML does not "
            "rely on them: it needs only the mean to be right, and its robust standard errors allow any spread. "
            "The distributions of the variables are shown below."
        )
        distributions_section(ctx)
        return
    result = ctx.analyze_long(CHECK_PARTS | {"residuals"}, "checks", "Running the residual checks")  # one fit for all
    if result is None:
        return
    residuals = result.get("residuals")
    diagnostics = result.get("diagnostics") or {}
    if residuals is not None:
        verdicts = check_verdicts(diagnostics, result.get("covariance", "HC1"), residuals)
        st.caption(
            plain(
                f"Four questions about the model, each answered in words over the chart that shows it. Residuals are "
                f"on the scale of {ctx.outcome_label}. Grey dots: {showing_words(residuals['shown'], residuals['n'])}; "
                "boxes, bands and tails use every row."
            )
        )
        figures = charts.check_figures(residuals, verdicts, ctx.outcome_label)
        for verdict in verdicts:
            concern = verdict["concern"] if verdict["tested"] else None
            figure = figures[verdict["check"]]
            _check_card(verdict["question"], concern, verdict["sentences"], figure, f"check_{verdict['check']}")
    _boxcox_card(ctx, result.get("boxcox"))
    if diagnostics:
        exports.table_downloads(core_tables.diagnostics_table(result), "checks", "checks")
    # Asked for: a chart per variable, drawn on every rerun, would double the view's time.
    if st.toggle("Also show each variable as recorded and as transformed", key=keys.SHOW_DISTRIBUTIONS):
        distributions_section(ctx)

    st.markdown("##### Regressors that move together")
    vif = display.vif_table(result, spec)
    if vif.empty:
        st.caption("With a single regressor there is nothing to be entangled with.")
    else:
        left, right = st.columns([1.2, 1])
        with left:
            st.table(tables.styled(vif if vif["Note"].astype(bool).any() else vif.drop(columns="Note")), hide_index=True)
        with right:
            st.caption(
                "The variance inflation factor says how much a coefficient's variance grows because its regressor "
                "is explained by the others; above 10 (a common rule of thumb) the coefficient is hard to pin down "
                "on its own. A quadratic's two terms always move together; that is expected."
            )

    st.markdown("##### Rows with the most pull on the fit")
    influence = (result.get("diagnostics") or {}).get("influence") or {}
    columns = [ctx.outcome] + [r["column"] for r in spec.get("regressors") or []]
    table = display.influence_table(result, ctx.frame, columns)
    if table.empty:
        st.caption("No row has a Cook's distance above 4/n.")
    else:
        st.caption(
            f"{influence.get('n_above_cutoff', 0):,} rows have a Cook's distance above 4/n = "
            f"{sig(influence.get('cooks_cutoff'), 2)} (a common rule of thumb); the {len(table)} largest are listed, "
            "numbered as in the spreadsheet (the header is row 1). Leverage measures how unusual a row's regressors "
            f"are ({influence.get('n_high_leverage', 0):,} rows above 2k/n = {sig(influence.get('high_leverage_cutoff'), 2)})."
        )
        numeric = [c for c in columns if c in ctx.frame.columns and pd.api.types.is_numeric_dtype(ctx.frame[c])]
        st.table(tables.styled(table, numbers_in=numeric), hide_index=True)


def _check_card(question: str, concern: bool | None, sentences: list[str], figure: Any, key: str) -> None:
    """One check in a card: the question and its mark, the sentences behind the verdict beside
    them, and under both the chart that shows it (titled with the verdict, so it says the same
    on a slide)."""
    with st.container(border=True):
        head, words = st.columns([1, 2], gap="medium")
        with head:
            st.markdown(f"##### {plain(question)}")
            if concern is not None:
                st.markdown(":orange-badge[⚠ Worth a look]" if concern else ":green-badge[✓ Looks fine]")
        with words:
            st.markdown("\n\n".join(plain(sentence) for sentence in sentences))
        chart(figure, key=key, screen_width=CARD_CHART)


def _boxcox_card(ctx: Context, boxcox: dict[str, Any] | None) -> None:
    question = f"Is the transform of {ctx.outcome} right?"
    if not boxcox:
        st.markdown(f"##### {plain(question)}")
        st.info(
            plain(
                f"The Box-Cox profile needs {ctx.outcome} above zero in every row used; it is not, so only the "
                "transforms that accept zeros (levels, IHS, log(x + 1), PPML) apply."
            )
        )
        return
    power = power_of(ctx.result["outcome"]["transform"])
    low, high = boxcox.get("ci_low"), boxcox.get("ci_high")
    concern = None if power is None or low is None or high is None else not low <= power <= high
    sentences = [boxcox_headline(boxcox, ctx.outcome) + ".", boxcox_sentence(boxcox, ctx.outcome)]
    if boxcox.get("note"):
        sentences.append(boxcox["note"])
    _check_card(question, concern, sentences, charts.boxcox_figure(boxcox, ctx.outcome), "boxcox_chart")


def power_of(transform: str) -> float | None:
    """The Box-Cox power a transform of the outcome is: 0 for a log, 1 for levels, L for boxcox:L."""
    if transform == "log":
        return 0.0
    if transform == "level":
        return 1.0
    if transform.startswith("boxcox:"):
        try:
            return float(transform.split(":", 1)[1])
        except ValueError:
            return None
    return None


def distributions_section(ctx: Context) -> None:
    items = ctx.analyze({"distributions"}).get("distributions") or []
    if not items:
        return
    st.markdown("##### Each variable, as recorded and as transformed")
    st.caption(
        "Skewness near 0 means a symmetric spread. A transform that brings it close to 0 has tamed a long tail; "
        "variables in levels are shown as recorded only. Categories and 0/1 variables are left out."
    )
    for item in items:
        chart(charts.distribution_figure(item), key=f"dist_{item['column']}")
        extra = f" · {item['n_left_out']:,} rows the transform cannot take left out" if item["n_left_out"] else ""
        words = skew_words(item["skew_raw"], item["skew_transformed"], item.get("zeros", 0))
        st.caption(plain(f"{item['label']}: {words}{extra}"))
