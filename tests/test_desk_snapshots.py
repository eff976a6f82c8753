"""Pictures of the main screens at 100x30 (pytest-textual-snapshot); pace and clocks are left out so they are stable.

Regenerate after a deliberate design change with: pytest tests/test_desk_snapshots.py --snapshot-update
"""

from __future__ import annotations

from opencode.coding import assignments as coding
from opencode.study import theme_runs_store
from opencode.study.store import Study
from opencode.study.survey_data import get_question
from helpers import make_app, make_desk_study

SIZE = (100, 30)


async def settle(pilot) -> None:
    """Let threaded loads (highlighter, term matrix) finish before the picture is taken."""
    await pilot.app.workers.wait_for_complete()
    await pilot.pause()


def test_desk_screen(tmp_path, snap_compare):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        coding.assign(study, 1, 3, "ash", source="machine", confidence=0.42)
        coding.set_note(study, 1, "ash", "mentions night twice")
        coding.assign(study, 1, 2, "bryn")
    assert snap_compare(make_app(path), press=["s"], terminal_size=SIZE, run_before=settle)


def test_desk_search_results(tmp_path, snap_compare):
    path = make_desk_study(tmp_path)
    keys = ["slash", *"staff", "enter", "right"]
    assert snap_compare(make_app(path), press=keys, terminal_size=SIZE, run_before=settle)


def test_help_overlay(tmp_path, snap_compare):
    assert snap_compare(make_app(make_desk_study(tmp_path)), press=["f1"], terminal_size=SIZE, run_before=settle)


def test_frame_screen(tmp_path, snap_compare):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        coding.assign(study, 1, 1, "ash")
        coding.assign(study, 4, 2, "ash")
    assert snap_compare(make_app(path), press=["f3", "down"], terminal_size=SIZE, run_before=settle)


def test_compare_screen(tmp_path, snap_compare):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        coding.set_codes(study, 1, [1], "ash")
        coding.set_codes(study, 1, [1, 2], "bryn")
    assert snap_compare(make_app(path), press=["f6"], terminal_size=SIZE, run_before=settle)


def test_terms_screen(tmp_path, snap_compare):
    async def load(pilot) -> None:
        await settle(pilot)
        await pilot.press("f4")
        await settle(pilot)
    assert snap_compare(make_app(make_desk_study(tmp_path)), press=["down"], terminal_size=SIZE, run_before=load)


def test_themes_screen(tmp_path, snap_compare):
    path = make_desk_study(tmp_path)
    summary = {"themes": [{"label": "Staff / safety", "top_terms": ["staff", "safe", "night"], "n_dominant": 2,
                           "representatives": [{"text": "Not safe without staff at night"}]},
                          {"label": "", "top_terms": ["work", "shift", "hour"], "n_dominant": 2}]}
    with Study.open(path) as study:
        run_id = theme_runs_store.save_run(study, get_question(study, "why").id, "nmf", 2, {}, summary, {})
        with study.transaction():  # a fixed time, so the picture does not change from run to run
            study._db.execute("UPDATE theme_runs SET created_at = '2030-01-02T03:04:05' WHERE id = ?", (run_id,))
    assert snap_compare(make_app(path), press=["f5", "tab"], terminal_size=SIZE, run_before=settle)
