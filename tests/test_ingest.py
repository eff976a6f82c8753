"""Importing survey files: every supported format, labels, missing codes, multiple response, non-answers."""

from __future__ import annotations


import numpy as np
import pandas as pd
import pyreadstat
import pytest

from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import survey_data
from opencode.study.store import Study


def _import(tmp_path, source, **options):
    target = tmp_path / "out.study"
    report = import_survey(target, source, ImportOptions(**{"id_column": "rid", "questions": ["why"], **options}))
    return target, report


def test_csv_import_keeps_text_and_flags_nonanswers(tmp_path, small_csv):
    target, report = _import(tmp_path, small_csv, missing={"support": [9.0]})
    assert report.created and report.respondents_added == 4 and report.nonanswers == 2
    with Study.open(target) as study:
        frame = survey_data.verbatims(study, "why")
        assert frame["text"].tolist()[1] == "n/a"  # flagged, never deleted
        assert frame["nonanswer"].tolist() == [False, True, False, True]
        support = survey_data.analysis_values(study, "support")
        assert np.isnan(support[2]) and support[0] == 1  # the missing code 9 is missing in analysis
        assert survey_data.raw_values(study, "support")[2] == 9  # and kept in the raw data
        assert survey_data.multiple_values(study, "chosen") == [{1.0, 3.0}, {2.0}, set(), {1.0}]
        assert survey_data.get_variable(study, "chosen").kind == "multiple"


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "utf-16", "cp1252"])
def test_csv_encodings_are_detected(tmp_path, encoding):
    path = tmp_path / "enc.csv"
    text = "rid,why\nR1,Caf\u00e9 opening hours are too short \u2013 really\nR2,na\u00efve plan\n"
    path.write_bytes(text.encode(encoding))
    target, report = _import(tmp_path, path)
    with Study.open(target) as study:
        assert survey_data.verbatims(study, "why")["text"].tolist()[0] == "Caf\u00e9 opening hours are too short \u2013 really"


def test_semicolon_delimiter_is_sniffed_and_tsv_read(tmp_path):
    semi = tmp_path / "semi.csv"
    semi.write_text("rid;why;age\nR1;too late, really;2\nR2;fine;3\n", encoding="utf-8")
    target, _ = _import(tmp_path, semi)
    with Study.open(target) as study:
        assert survey_data.verbatims(study, "why")["text"].tolist() == ["too late, really", "fine"]
    tsv = tmp_path / "tab.tsv"
    tsv.write_text("rid\twhy\nR1\tgood idea\nR2\tbad idea\n", encoding="utf-8")
    target2 = tmp_path / "tab.study"
    import_survey(target2, tsv, ImportOptions("rid", ["why"]))
    with Study.open(target2) as study:
        assert survey_data.respondent_keys(study) == ["R1", "R2"]


def test_xlsx_sheet_choice(tmp_path):
    path = tmp_path / "book.xlsx"
    with pd.ExcelWriter(path) as writer:
        pd.DataFrame({"x": [1]}).to_excel(writer, sheet_name="notes", index=False)
        pd.DataFrame({"rid": ["R1", "R2"], "why": ["late hours", "no staff"], "age": [1, 2]}).to_excel(
            writer, sheet_name="data", index=False)
    target = tmp_path / "x.study"
    import_survey(target, path, ImportOptions("rid", ["why"], sheet="data"))
    with Study.open(target) as study:
        assert survey_data.verbatims(study, "why")["text"].tolist() == ["late hours", "no staff"]


def test_spss_labels_and_user_missing(tmp_path):
    # Written and read back with pyreadstat, the reference reader for .sav files.
    path = tmp_path / "s.sav"
    frame = pd.DataFrame({"rid": ["R1", "R2", "R3"], "why": ["safer", "n/a", "later"], "support": [1.0, 9.0, 5.0]})
    pyreadstat.write_sav(frame, str(path), column_labels={"support": "Support for the plan"},
                         variable_value_labels={"support": {1.0: "Strongly oppose", 5.0: "Strongly support",
                                                            9.0: "Refused"}},
                         missing_ranges={"support": [9.0]})
    target, _ = _import(tmp_path, path)
    with Study.open(target) as study:
        support = survey_data.get_variable(study, "support")
        assert support.label == "Support for the plan"
        assert support.value_labels == {1.0: "Strongly oppose", 5.0: "Strongly support", 9.0: "Refused"}
        assert support.missing_codes == {9.0}
        assert np.isnan(survey_data.analysis_values(study, "support")[1])


def test_stata_and_parquet(tmp_path):
    frame = pd.DataFrame({"rid": ["R1", "R2"], "why": ["open later", "keep staff"], "age": [1.0, 2.0]})
    dta = tmp_path / "s.dta"
    pyreadstat.write_dta(frame, str(dta), variable_value_labels={"age": {1.0: "young", 2.0: "old"}})
    target, _ = _import(tmp_path, dta)
    with Study.open(target) as study:
        assert survey_data.get_variable(study, "age").value_labels == {1.0: "young", 2.0: "old"}
    parquet = tmp_path / "s.parquet"
    frame.to_parquet(parquet)
    target2 = tmp_path / "p.study"
    import_survey(target2, parquet, ImportOptions("rid", ["why"]))
    with Study.open(target2) as study:
        assert survey_data.verbatims(study, "why")["text"].tolist() == ["open later", "keep staff"]


def test_dichotomy_columns_become_one_multiple_variable(tmp_path):
    path = tmp_path / "m.csv"
    path.write_text("rid,why,m_a,m_b,m_c\nR1,x,1,0,1\nR2,y,0,0,0\nR3,z,0,1,0\n", encoding="utf-8")
    target, _ = _import(tmp_path, path, multi={"reasons": ["m_a", "m_b", "m_c"]})
    with Study.open(target) as study:
        assert survey_data.multiple_values(study, "reasons") == [{1.0, 3.0}, set(), {2.0}]
        assert survey_data.get_variable(study, "reasons").value_labels == {1.0: "m_a", 2.0: "m_b", 3.0: "m_c"}


def test_kind_override_and_text_categories(tmp_path):
    path = tmp_path / "k.csv"
    path.write_text("rid,why,area,score\nR1,a,North,3\nR2,b,South,4\nR3,c,North,5\nR4,d,North,4\n", encoding="utf-8")
    target, _ = _import(tmp_path, path, kinds={"score": "numeric"})
    with Study.open(target) as study:
        area = survey_data.get_variable(study, "area")
        assert area.kind == "single" and area.value_labels == {1.0: "North", 2.0: "South"}
        assert survey_data.get_variable(study, "score").kind == "numeric"


def test_labels_file_gives_csv_the_labels_a_sav_carries(tmp_path, small_csv):
    labels = tmp_path / "labels.csv"
    labels.write_text("variable,label,code,value_label,missing\nsupport,Support for the plan,,,\n"
                      "support,,1,Strongly oppose,\nsupport,,5,Strongly support,\nsupport,,9,Refused,1\n",
                      encoding="utf-8")
    target, _ = _import(tmp_path, small_csv, labels_file=labels)
    with Study.open(target) as study:
        support = survey_data.get_variable(study, "support")
        assert support.label == "Support for the plan"
        assert list(support.value_labels.values()) == ["Strongly oppose", "Strongly support", "Refused"]
        assert support.missing_codes == {9.0}


def test_control_characters_dropped_text_kept(tmp_path):
    path = tmp_path / "c.csv"
    path.write_bytes("rid,why\nR1,\"bad\x07 bell\x1b[31m and \u202eflip\"\nR2,ok\n".encode("utf-8"))
    target, _ = _import(tmp_path, path)
    with Study.open(target) as study:
        assert survey_data.verbatims(study, "why")["text"].tolist()[0] == "bad bell[31m and flip"


def test_null_markers_are_empty_in_closed_columns_and_kept_in_answers(tmp_path):
    # "\\N" is a database dump's own null marker: missing in answers and closed-ended columns alike.
    path = tmp_path / "n.csv"
    path.write_text("rid,why,age\nR1,\\N,\\N\nR2,fine,2\nR3,,3\n", encoding="utf-8")
    target, _ = _import(tmp_path, path)
    with Study.open(target) as study:
        frame = survey_data.verbatims(study, "why")
        assert frame["text"].tolist() == ["", "fine", ""]
        assert frame["nonanswer"].tolist()[0] and frame["nonanswer"].tolist()[2]
        assert np.isnan(survey_data.analysis_values(study, "age")[0])
