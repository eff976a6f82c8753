"""`oecode sample` and `oecode agree` on the double-coded demo study: tables printed, files written, clear errors."""

from __future__ import annotations

import csv
import re

import pytest

from opencode.cli import main
from opencode.coding import assignments as coding
from opencode.study import survey_data
from opencode.study.store import Study

NAN = re.compile(r"\bnan\b", re.IGNORECASE)


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_sample_draw_assign_status_list(demo_copy, capsys):
    code, out, _ = run(capsys, "sample", "draw", demo_copy, "--question", "why", "--name", "rel1", "--percent", "10",
                       "--strata", "age_band", "--seed", "4")
    assert code == 0 and "sample rel1 of question why: 221 of 2,211 verbatims" in out and "stratum" in out
    code, out, _ = run(capsys, "sample", "assign", demo_copy, "--question", "why", "--name", "rel1",
                       "--coders", "ash,bryn")
    assert code == 0 and "coded blind by ash, bryn" in out
    code, out, _ = run(capsys, "sample", "status", demo_copy, "--question", "why", "--name", "rel1")
    assert code == 0 and re.search(r"^ash\s+\d+\s+\d+", out, re.M) and "finished by every assigned coder" in out
    code, out, _ = run(capsys, "sample", "list", demo_copy, "--question", "why")
    assert code == 0 and "coders: ash, bryn" in out


def test_agree_prints_tables_and_writes_csv_and_html(demo_copy, tmp_path, capsys):
    target_csv, target_html = tmp_path / "agree.csv", tmp_path / "agree.html"
    code, out, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--resamples", "50",
                         "--csv", target_csv, "--html", target_html, "--differences", "2")
    assert code == 0, err
    for part in ("Across the code frame", "Per code (present / absent)", "Cohen's kappa", "Coder pair ash and bryn",
                 "Not safe without staff", "300 by two or more coders", "Verbatims where the coders differ"):
        assert part in out
    assert not NAN.search(out)
    assert len(re.findall(r"^respondent WR\d+: ", out, re.M)) == 2  # the differences, by respondent id
    disputed = out.split("Verbatims with most disputed codes")[1]
    assert re.search(r"^respondent\s+disputed codes\s+ash\s+bryn", disputed, re.M)
    assert re.search(r"^WR\d+\s+\d+\s", disputed, re.M)
    with open(target_csv, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert rows[0][:2] == ["section", "code"] and len(rows) > 50
    page = target_html.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and '<section class="oc-agreement">' in page


def test_agree_on_a_sample_and_adjudicate_agreed(demo_copy, capsys, csv_sets):
    sets = csv_sets
    agreed = sum(sets["ash"][r] == sets["bryn"][r] for r in sets["ash"])
    run(capsys, "sample", "draw", demo_copy, "--question", "why", "--name", "rel1", "--n", "400", "--seed", "1")
    code, out, _ = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--sample", "rel1",
                       "--resamples", "0")
    assert code == 0 and "reliability sample rel1" in out
    code, out, _ = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn",
                       "--adjudicate", "agreed")
    assert code == 0 and f"final: {agreed:,} verbatims" in out
    with Study.open(demo_copy) as study:
        settled = study._db.execute("SELECT COUNT(DISTINCT verbatim_id) FROM assignments WHERE coder = 'final'"
                                   ).fetchone()[0]
        marked = study._db.execute("SELECT COUNT(*) FROM coded_marks WHERE coder = 'final'").fetchone()[0]
    assert settled + marked == agreed
    code, out, _ = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--adjudicate", "undo")
    assert code == 0 and "undid final's last change" in out


def test_agree_settles_one_verbatim_named_by_respondent_id(demo_copy, capsys):
    """--respondent takes the id the differences list (and the desk's go-to) shows."""
    code, out, _ = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--resamples", "0",
                       "--differences", "1")
    respondent = re.search(r"^respondent (\S+): ", out, re.M).group(1)
    code, out, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--adjudicate",
                         "set", "--respondent", respondent, "--codes", "1,7")
    assert code == 0, err
    assert out == f"final now holds 1, 7 for respondent {respondent}\n"
    with Study.open(demo_copy) as study:
        verbatim_id = int(survey_data.verbatims(study, "why").set_index("respondent").at[respondent, "verbatim_id"])
        held = [a.number for a in coding.codes_of(study, verbatim_id, "final", ("hand",))]
    assert held == [1, 7]
    code, out, _ = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--adjudicate",
                       "take", "--respondent", respondent, "--side", "ash")
    assert code == 0 and out.startswith("final now holds ") and out.endswith(f" for respondent {respondent}\n")
    # the study's internal verbatim number stays reachable under its own name (and older scripts' --verbatim)
    for option in ("--verbatim-id", "--verbatim"):
        code, out, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn",
                             "--adjudicate", "union", option, verbatim_id)
        assert code == 0, err
        assert out.endswith(f" for respondent {respondent}\n")


def test_a_respondent_not_in_the_question_is_one_clear_line(demo_copy, capsys):
    code, out, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--adjudicate",
                         "take", "--respondent", "ZZ404", "--side", "ash")
    assert code == 1 and out == ""
    assert err == "oecode agree: respondent 'ZZ404' has no verbatim in question 'why'\n"
    with Study.open(demo_copy) as study:
        assert study._db.execute("SELECT COUNT(*) FROM assignments WHERE coder = 'final'").fetchone()[0] == 0


@pytest.mark.parametrize("argv, message", [
    (["agree", "--question", "why", "--coders", "ash,cy"], "coder 'cy' has coded no verbatims of question 'why'"),
    (["agree", "--question", "why", "--coders", "ash"], "name at least 2 coders"),
    (["agree", "--question", "wh", "--coders", "ash,bryn"], "no open question named 'wh'"),
    (["agree", "--question", "why", "--coders", "ash,bryn", "--sample", "rel7"], "no reliability sample named 'rel7'"),
    (["agree", "--question", "why", "--coders", "ash,bryn", "--adjudicate", "take"], "--respondent is needed"),
    (["agree", "--question", "why", "--coders", "ash,bryn", "--adjudicate", "set", "--respondent", "WR04180", "--codes",
      "x"],
     "not a comma-separated list of code numbers"),
    (["sample", "draw", "--question", "why", "--name", "r"], "give --n N or --percent P"),
    (["sample", "status", "--question", "why", "--name", "r"], "no reliability sample named 'r'"),
    (["sample", "assign", "--question", "why"], "--name is needed"),
])
def test_bad_input_exits_1_with_one_clear_line(demo_copy, capsys, argv, message):
    argv = [argv[0], demo_copy, *argv[1:]]
    code, out, err = run(capsys, *argv)
    assert code == 1 and message in err and "Traceback" not in err


def test_agree_leads_with_one_headline_and_advice(demo_copy, capsys, csv_sets, monkeypatch):
    monkeypatch.setenv("COLUMNS", "200")  # the ranking read one row per line; at 80 columns its notes wrap
    sets = csv_sets
    # counted by hand from demo/double-coded.csv: verbatims where one coder has 7 without 9 and the other 9 without 7
    swapped = sum(1 for r in sets["ash"]
                  if ({7, 9} & sets["ash"][r]) and len({7, 9} & sets["ash"][r]) == 1
                  and ({7, 9} & sets["bryn"][r]) and len({7, 9} & sets["bryn"][r]) == 1
                  and ({7, 9} & sets["ash"][r]) != ({7, 9} & sets["bryn"][r]))
    code, out, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--resamples", "0")
    assert code == 0, err
    assert out.count("Headline:") == 1 and out.index("Headline:") < out.index("What to do")
    assert "Left out of the headline mean: the special codes 98 Don't know, 99 No answer" in out
    assert "Count them in with --include-special-codes." in out
    assert (f"Tighten the definitions of 7 Convenient after work and 9 Fair access for shift workers; recode the "
            f"{swapped} verbatims where they were swapped") in out
    assert "Landis & Koch 1977" in out and "Krippendorff 2004" in out
    ranking = out.split("Codes from least to most reliable")[1].split("Across the code frame")[0]
    assert re.search(r"^1\s+9\s+Fair access for shift workers .* under the bar", ranking, re.M)
    code, out, _ = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--resamples", "0",
                       "--kappa-bar", "0.3", "--alpha-bar", "0.3", "--include-special-codes")
    ranking = out.split("Codes from least to most reliable")[1].split("Across the code frame")[0]
    assert code == 0 and "bars: kappa 0.300, alpha 0.300" in ranking and "under the bar" not in ranking
    assert "Headline: reliable" in out and "are counted in the headline mean" in out
    code, _, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--kappa-bar", "1.2")
    assert code == 1 and "kappa bar must be between -1 and 1" in err


def test_the_command_line_defaults_are_the_library_bars():
    from opencode.analysis import choices
    from opencode.analysis.agreement.verdict import ALPHA_BAR, KAPPA_BAR

    assert (choices.AGREEMENT_KAPPA_BAR, choices.AGREEMENT_ALPHA_BAR) == (KAPPA_BAR, ALPHA_BAR)
