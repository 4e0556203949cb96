"""Undo and redo of model edits in the app (AppTest), and saving a model twice."""

from __future__ import annotations

from tests.app_support import edit_grid, show, start


def _terms(at) -> list[str]:
    found = [t.value for t in at.table if "What it means" in t.value.columns]
    return [str(v).replace("\\", "") for v in found[0]["Term"]] if found else []


def test_undo_and_redo_a_transform_edit() -> None:
    at = start()
    before = _terms(at)
    assert "log of drink_price" in before
    assert at.button(key="undo_edit").disabled
    edit_grid(at, {"drink_price": {"transform": "level"}})
    edited = _terms(at)
    assert "drink_price" in edited and "log of drink_price" not in edited
    at.button(key="undo_edit").click().run()
    assert not at.exception
    assert _terms(at) == before
    assert not at.button(key="redo_edit").disabled
    at.button(key="redo_edit").click().run()
    assert _terms(at) == edited
    at.button(key="undo_edit").click().run()
    assert _terms(at) == before


def test_saving_an_identical_model_says_so() -> None:
    at = start()
    show(at, "Compare models")
    at.button(key="save_model").click().run()
    at.button(key="save_model").click().run()
    assert not at.exception
    saved = at.session_state["saved_models"]
    assert len(saved) == 1
    assert any("already saved" in c.value for c in at.caption)
