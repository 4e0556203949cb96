"""The residual checks view: what the tests say, the residuals, the outcome's power, the
variables as transformed, entangled regressors and influential rows."""

from __future__ import annotations

import streamlit as st

from app import charts, exports, tables
from app.context import CHECK_PARTS, HALF_COLUMN, Context, chart
from core.output import display
from core.output import tables as core_tables
from core.output.escape import plain
from core.output.numbers import sig
from core.output.text import (
    boxcox_sentence,
    check_sentences,
    showing_words,
    skew_words,
)


# --- residual checks ----------------------------------------------------------------------------------------
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
    with st.spinner("Running the residual checks…"):
        result = ctx.analyze(CHECK_PARTS)
        residuals = ctx.analyze({"residuals"}).get("residuals")
    st.markdown("##### What the tests say")
    for concern, sentence in check_sentences(result.get("diagnostics") or {}, result.get("covariance", "HC1")):
        st.markdown(f"{':orange[**⚠**]' if concern else ':green[**✓**]'} {plain(sentence)}")
    if result.get("diagnostics"):
        exports.table_downloads(core_tables.diagnostics_table(result), "checks", "checks")
    if residuals is not None:
        st.markdown("##### The residuals")
        st.caption(
            plain(
                f"Residuals are on the scale of {ctx.outcome_label}. "
                f"Dots: {showing_words(residuals['shown'], residuals['n'])}; lines and bars use every row."
            )
        )
        fitted_label = ctx.outcome_label
        top = st.columns(2)
        with top[0]:
            chart(charts.residuals_figure(residuals, fitted_label), key="resid_fitted", screen_width=HALF_COLUMN)
        with top[1]:
            chart(charts.qq_figure(residuals), key="resid_qq", screen_width=HALF_COLUMN)
        bottom = st.columns(2)
        with bottom[0]:
            chart(charts.residual_histogram(residuals), key="resid_hist", screen_width=HALF_COLUMN)
        with bottom[1]:
            chart(charts.scale_location_figure(residuals, fitted_label), key="resid_scale", screen_width=HALF_COLUMN)

    st.markdown(f"##### Is the transform of {plain(ctx.outcome)} right?")
    boxcox = result.get("boxcox")
    if boxcox:
        chart(charts.boxcox_figure(boxcox, ctx.outcome), key="boxcox_chart")
        st.markdown(plain(boxcox_sentence(boxcox, ctx.outcome)))
    else:
        st.info(
            plain(
                f"The Box-Cox profile needs {ctx.outcome} above zero in every row used; it is not, so only the "
                "transforms that accept zeros (levels, IHS, log(x + 1), PPML) apply."
            )
        )
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
        st.table(tables.styled(table, numbers_in=columns), hide_index=True)


def distributions_section(ctx: Context) -> None:
    items = ctx.analyze({"distributions"}).get("distributions") or []
    if not items:
        return
    st.markdown("##### Each variable, as recorded and as transformed")
    st.caption(
        "Skewness near 0 means a symmetric spread. A transform that brings it close to 0 has tamed a long tail; "
        "variables in levels are shown as recorded only. Categories and 0/1 variables are left out."
    )
    for start in range(0, len(items), 2):
        cols = st.columns(2)
        for col, item in zip(cols, items[start : start + 2], strict=False):
            with col:
                chart(charts.distribution_figure(item), key=f"dist_{item['column']}")
                extra = f" · {item['n_left_out']:,} rows the transform cannot take left out" if item["n_left_out"] else ""
                words = skew_words(item["skew_raw"], item["skew_transformed"], item.get("zeros", 0))
                st.caption(plain(f"{item['label']}: {words}{extra}"))
