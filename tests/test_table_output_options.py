"""--csv / --json on the tabular verbs (full columns for scripts, parsed back with the csv and json modules),
kwic's "N of M", drivers' odds-ratio intervals and side header, and `--wide`."""

from __future__ import annotations

import csv
import io
import json
import re

import pytest

from opencode.cli import main

STUDY = "oecode-demo/wrenfield.study"


@pytest.fixture
def run(demo_folder, monkeypatch, capsys):
    monkeypatch.chdir(demo_folder.parent)

    def call(*words: str) -> tuple[str, str]:
        assert main(list(words)) == 0, words
        captured = capsys.readouterr()
        return captured.out, captured.err

    return call


def _csv(text: str) -> list[dict]:
    return list(csv.DictReader(io.StringIO(text)))


def test_words_csv_and_json_hold_every_column(run):
    out, _ = run("words", STUDY, "--question", "why", "--top", "5", "--csv")
    rows = _csv(out)
    assert len(rows) == 5
    assert list(rows[0]) == ["term", "label", "count", "verbatims", "percent", "forms"]
    assert int(rows[0]["verbatims"]) >= int(rows[-1]["verbatims"])
    out, _ = run("words", STUDY, "--question", "why", "--top", "5", "--json")
    records = json.loads(out)
    assert [r["term"] for r in records] == [r["term"] for r in rows]
    assert all(isinstance(r["count"], int) for r in records)


def test_drivers_json_has_the_full_ranking_and_the_text_the_intervals(run):
    out, _ = run("drivers", STUDY, "--question", "why", "--outcome", "support", "--split", "top2", "--json")
    records = json.loads(out)
    assert len(records) > 20  # every term, not just the printed top 20
    for column in ("comparison", "term", "coef", "odds_ratio", "stability", "uni_or", "uni_or_low", "uni_or_high",
                   "p", "q", "monroe_z", "docs_1", "docs_0"):
        assert column in records[0], column
    text, _ = run("drivers", STUDY, "--question", "why", "--outcome", "support", "--split", "top2")
    assert re.search(r"\d+\.\d\d \[\d+\.\d\d, \d+\.\d\d\]", text)  # OR [low, high]
    assert "side 1 = top 2 (Support / Strongly support)" in text
    body = text.split("-----")[1]
    assert "Strongly oppose / Oppose)" not in body  # the side label is in the header, not on every row
    assert "sorted by stability" in text
    assert "e-" not in text  # q never in scientific notation
    wide, _ = run("drivers", STUDY, "--question", "why", "--outcome", "support", "--split", "top2", "--wide")
    assert "model OR" in wide and "model OR" not in text


def test_tables_csv_has_letters_and_row_test(run):
    out, err = run("tables", STUDY, "--question", "why", "--banner", "support", "--with-suggestions", "--csv")
    rows = _csv(out)
    assert rows and "row test q: support" in rows[0] and "letters: support=Oppose" in rows[0]
    assert "share: support=Strongly support" in rows[0]
    assert float(rows[0]["share_of_respondents"]) <= 1.0
    assert "warning" in err and "warning" not in out  # stdout carries only the data


def test_frame_list_and_kwic_csv(run):
    out, _ = run("frame", "list", STUDY, "--question", "why", "--json")
    codes = json.loads(out)
    assert {"number", "label", "kind", "net", "rule"} <= set(codes[0])
    assert any(c["kind"] == "net" for c in codes) and all(isinstance(c["number"], int) for c in codes)
    out, _ = run("kwic", STUDY, "safe", "--question", "why", "--show", "support", "--limit", "8", "--csv")
    rows = _csv(out)
    assert len(rows) == 8 and list(rows[0]) == ["respondent", "support", "before", "match", "after"]


def test_kwic_says_how_many_of_how_many(run):
    out, _ = run("kwic", STUDY, "safe", "--question", "why", "--limit", "1000", "--csv")
    total = len(_csv(out))
    text, _ = run("kwic", STUDY, "safe", "--question", "why", "--limit", "8")
    assert f"8 of {total:,} occurrences" in text
    text, _ = run("kwic", STUDY, "safe", "--question", "why", "--limit", "1000")
    assert f"all {total:,} occurrences" in text


def test_csv_to_a_file_keeps_the_text(run, demo_folder):
    out, err = run("model", "curve", STUDY, "--question", "why", "--csv", "oecode-demo/curve.csv")
    assert "threshold" in out  # the text table still printed
    rows = _csv((demo_folder / "curve.csv").read_text(encoding="utf-8"))
    assert list(rows[0]) == ["threshold", "coverage", "accuracy", "precision", "recall", "verbatims"]


def test_info_and_sample_status_json(run):
    out, _ = run("info", STUDY, "--json")
    records = json.loads(out)
    assert {r["what"] for r in records} == {"open question", "closed-ended variable"}
    assert any(r["name"] == "support" and "Strongly oppose" in r["values"] for r in records)
    run("sample", "draw", STUDY, "--question", "why", "--name", "t", "--n", "20")
    run("sample", "assign", STUDY, "--question", "why", "--name", "t", "--coders", "ash,bryn")
    out, _ = run("sample", "status", STUDY, "--question", "why", "--name", "t", "--csv")
    rows = _csv(out)
    assert [r["coder"] for r in rows] == ["ash", "bryn"] and all(int(r["to_do"]) >= 0 for r in rows)
