"""A later wave or a corrected export merges by respondent id without losing anything already coded."""

from __future__ import annotations

import numpy as np

from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import survey_data
from opencode.study.store import Study, now


def test_later_wave_adds_respondents_and_keeps_codes(tmp_path):
    first = tmp_path / "wave1.csv"
    first.write_text("rid,why,age\nR1,too late for me,1\nR2,keep the staff,2\n", encoding="utf-8")
    target = tmp_path / "s.study"
    import_survey(target, first, ImportOptions("rid", ["why"]))
    with Study.open(target) as study, study.transaction():
        frame_id = study._db.execute("INSERT INTO frames (name) VALUES ('why')").lastrowid
        code_id = study._db.execute("INSERT INTO codes (frame_id, number, label) VALUES (?, 1, 'Staff')",
                                   (frame_id,)).lastrowid
        study._db.execute("INSERT INTO assignments (verbatim_id, code_id, coder, source, created_at) "
                         "VALUES (2, ?, 'ash', 'hand', ?)", (code_id, now()))
    second = tmp_path / "wave2.csv"
    second.write_text("rid,why,age\nR2,keep the staff please,3\nR3,great for students,1\n", encoding="utf-8")
    report = import_survey(target, second, ImportOptions("rid", ["why"]))
    assert (report.respondents_added, report.respondents_updated) == (1, 1)
    assert [(c.respondent, c.old_text, c.new_text) for c in report.changed_verbatims] == [
        ("R2", "keep the staff", "keep the staff please")]
    with Study.open(target) as study:
        assert survey_data.respondent_keys(study) == ["R1", "R2", "R3"]
        texts = survey_data.verbatims(study, "why")["text"].tolist()
        assert texts == ["too late for me", "keep the staff", "great for students"]  # changed text reported, kept
        np.testing.assert_array_equal(survey_data.raw_values(study, "age"), [1, 3, 1])  # corrected value taken
        assert study._db.execute("SELECT COUNT(*) FROM assignments").fetchone()[0] == 1


def test_new_variable_in_a_later_wave_is_missing_for_earlier_respondents(tmp_path):
    first = tmp_path / "a.csv"
    first.write_text("rid,why\nR1,x\n", encoding="utf-8")
    second = tmp_path / "b.csv"
    second.write_text("rid,why,area\nR2,y,2\n", encoding="utf-8")
    target = tmp_path / "s.study"
    import_survey(target, first, ImportOptions("rid", ["why"]))
    import_survey(target, second, ImportOptions("rid", ["why"]))
    with Study.open(target) as study:
        area = survey_data.raw_values(study, "area")
        assert np.isnan(area[0]) and area[1] == 2
