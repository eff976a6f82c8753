"""Importing existing codes: delimited numbers or labels, 0/1 columns, spread columns, the demo's long file."""

from __future__ import annotations

import pytest

from opencode.coding import assignments as A
from opencode.coding import frames, history
from opencode.coding.import_codes import import_codes
from opencode.errors import OpenCodeError
from opencode.resources import demo_dir
from opencode.study.store import Study
from helpers import make_text_study


@pytest.fixture
def study(tmp_path):
    s = make_text_study(tmp_path, ["bike stolen", "lost my keys", "both", "nothing", "fine"])
    frames.add_code(s, "why", "Theft", 3)
    frames.add_code(s, "why", "Loss", 7)
    yield s
    s.close()


def coded(study, coder="ash"):
    rows = A.assignments(study, "why", [coder])
    keys = dict(zip(range(1, 6), [f"R{i}" for i in range(5)]))
    by_verbatim = {v: keys.get(v, v) for v in rows["verbatim_id"]}
    return sorted((by_verbatim[v], n) for v, n in zip(rows["verbatim_id"], rows["number"]))


def test_delimited_numbers_and_labels(study, tmp_path):
    path = tmp_path / "codes.csv"
    path.write_text('rid,c\nR0,3\nR1,Loss\nR2,"Theft, Loss"\nR3,\nR9,3\n')
    report = import_codes(study, "why", ["c"], "ash", path, id_column="rid")
    assert report.layout == "delimited" and report.added == {"ash": 4} and report.verbatims == {"ash": 3}
    assert report.unmatched_respondents == ["R9"]
    assert coded(study) == [("R0", 3), ("R1", 7), ("R2", 3), ("R2", 7)]
    assert history.undo(study, "ash") == "import-codes" and coded(study) == []


def test_unknown_label_is_an_error_naming_the_row_unless_create(study, tmp_path):
    path = tmp_path / "codes.csv"
    path.write_text("rid,c\nR0,3;7\nR1,Vandalism\n")
    with pytest.raises(OpenCodeError, match=r"row 3 \(data row 2\), column c: label 'Vandalism' matches no code"):
        import_codes(study, "why", ["c"], "ash", path, id_column="rid")
    assert coded(study) == []
    report = import_codes(study, "why", ["c"], "ash", path, id_column="rid", create=True)
    assert report.created == [(8, "Vandalism")]
    assert frames.get_code(study, "why", 8).label == "Vandalism"


def test_dichotomies_and_spread(study, tmp_path):
    path = tmp_path / "wide.csv"
    path.write_text("rid,why_c3,why_c7,first,second\nR0,1,0,3,\nR1,0,1,Loss,\nR2,1,1,3,7\nR3,0,0,,\n")
    report = import_codes(study, "why", ["why_c*"], "ash", path, id_column="rid")
    assert report.layout == "flags"
    assert coded(study) == [("R0", 3), ("R1", 7), ("R2", 3), ("R2", 7)]
    report = import_codes(study, "why", ["first", "second"], "bryn", path, id_column="rid")
    assert report.layout == "mentions" and coded(study, "bryn") == coded(study, "ash")
    assert import_codes(study, "why", ["why_c*"], "ash", path, id_column="rid").already == 4  # nothing duplicated
    assert len(A.assignments(study, "why", ["ash"])) == 4


def test_demo_double_coded_long_file(tmp_path):
    import pandas as pd

    from opencode.ingest.importer import ImportOptions, import_survey

    import_survey(tmp_path / "demo.study", demo_dir() / "wrenfield.csv",
                  ImportOptions(id_column="resp_id", questions=["why", "improve"]))
    study = Study.open(tmp_path / "demo.study")
    from opencode.coding.frame_io import import_frame

    import_frame(study, "why", demo_dir() / "frame-why.csv")
    report = import_codes(study, "why", ["codes"], None, demo_dir() / "double-coded.csv", id_column="respondent_id",
                          coder_column="coder", question_column="question")
    long = pd.read_csv(demo_dir() / "double-coded.csv", dtype=str)
    long = long[long["question"] == "why"]
    for coder in ("ash", "bryn"):
        mine = long[long["coder"] == coder]
        expected = sum(len(c.split(";")) for c in mine["codes"].fillna("") if c)
        assert report.added[coder] == expected and report.verbatims[coder] == len(mine)
        assert sum(A.code_counts(study, "why", coder).values()) == expected
    study.close()


def test_needs_a_coder_and_a_real_column(study, tmp_path):
    path = tmp_path / "codes.csv"
    path.write_text("rid,c\nR0,3\n")
    with pytest.raises(OpenCodeError, match="name the coder"):
        import_codes(study, "why", ["c"], None, path, id_column="rid")
    with pytest.raises(OpenCodeError, match="no column named 'nope'"):
        import_codes(study, "why", ["nope"], "ash", path, id_column="rid")
    path.write_text("rid,a,b\nR0,3,2\n")
    with pytest.raises(OpenCodeError, match="column b: code 2 is not in the frame"):
        import_codes(study, "why", ["a", "b"], "ash", path, id_column="rid", layout="mentions")
