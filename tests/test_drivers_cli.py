"""`oecode drivers` on the demo study: the table, quality, chart, CSV (cells guarded), indicators, errors."""

from __future__ import annotations

import csv

import pytest

from helpers import file_digest

from opencode.cli import main
from opencode.demo_job import build_demo_study
from opencode.study import survey_data
from opencode.study.store import Study


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return build_demo_study(tmp_path_factory.mktemp("cli") / "demo.study")


def test_table_chart_csv_and_indicators(demo, tmp_path, capsys):
    chart, table = tmp_path / "d.png", tmp_path / "d.csv"
    code = main(["drivers", str(demo), "--question", "why", "--outcome", "support", "--split", "4,5 vs 1,2",
                 "--subsamples", "5", "--holdout", "0.2", "--sort", "q", "--top", "6", "--chart", str(chart),
                 "--csv", str(table), "--indicators", "staff", "--actor", "ash"])
    out = capsys.readouterr().out
    assert code == 0
    assert "cross-validated AUC" in out and "held-out verbatims" in out and "missing code (Refused)" in out
    assert chart.read_bytes().startswith(b"\x89PNG")
    assert "indicator variables stored: why_t_staff" in out
    with open(table, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert [float(r["q"]) for r in rows] == sorted(float(r["q"]) for r in rows)  # --sort q, smallest first
    # OWASP CSV injection: the 'direction' text is plain, and no cell starts with a formula trigger unquoted.
    assert all(not value.startswith(("=", "+", "@")) for r in rows for value in r.values())
    with Study.open(demo) as study:
        assert survey_data.get_variable(study, "why_t_staff").origin == "indicator"
        assert study.get_setting("drivers:why")["split"] == "4,5 vs 1,2"


def test_errors_are_one_line_and_change_nothing(demo, tmp_path, capsys):
    before = file_digest(demo)
    assert main(["drivers", str(demo), "--question", "why", "--outcome", "nope"]) == 1
    assert "no variable named 'nope'" in capsys.readouterr().err
    assert main(["drivers", str(demo), "--question", "why", "--outcome", "support"]) == 1
    assert "choose a split" in capsys.readouterr().err
    assert main(["drivers", str(demo), "--question", "why", "--outcome", "support", "--split", "top2",
                 "--chart", str(tmp_path / "d.gif")]) == 1
    assert "end the name in .png" in capsys.readouterr().err
    assert file_digest(demo) == before
