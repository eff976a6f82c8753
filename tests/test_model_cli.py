"""`oecode model` and `oecode frame rule --dry-run` name verbatims by respondent id, and the advice they print is a
command that runs as shown."""

from __future__ import annotations

import re
import shlex

from opencode.cli import main
from opencode.study import desk_queries as dq
from opencode.study import survey_data
from opencode.study.store import Study

RESPONDENT = re.compile(r"^\s*(WR\d{5})\s", re.M)


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def _opens(study_path, respondents: list[str]) -> list[int | None]:
    """What the desk's go-to opens for each respondent id (tui/session.py go_to_respondent)."""
    with Study.open(study_path) as study:
        question_id = survey_data.get_question(study, "why").id
        return [dq.verbatim_of_respondent(study, question_id, r) for r in respondents]


def test_queues_and_rule_dry_runs_list_respondent_ids(demo_folder, capsys):
    study = demo_folder / "wrenfield.study"
    for argv in (["model", "queue", study, "--question", "why", "--limit", "4"],
                 ["model", "queue", study, "--question", "why", "--kind", "second-look", "--limit", "4"],
                 ["model", "suggest", study, "--question", "why", "--limit", "4"],
                 ["frame", "rule", study, "--question", "why", "--code", "1", "--set", "staff", "--dry-run",
                  "--show", "4"]):
        code, out, err = run(capsys, *argv)
        assert code == 0, err
        found = RESPONDENT.findall(out)
        assert len(found) == 4, out
        assert None not in _opens(study, found)  # each one is a respondent the desk's go-to finds


def test_the_curve_prints_an_apply_command_that_runs_as_shown(demo_folder, capsys):
    study = demo_folder / "wrenfield.study"
    code, out, err = run(capsys, "model", "curve", study, "--question", "why")
    assert code == 0, err
    command = out.strip().splitlines()[-1].strip()
    assert command.startswith("oecode model apply ") and "STUDY" not in command and " T" not in command
    words = shlex.split(command)
    assert words[3] == str(study)
    code, out, err = run(capsys, *words[1:])
    assert code == 0, err
    assert re.search(r"threshold 0\.\d\d: \d+ machine codes on \d+ of", out)


def test_train_points_to_the_curve_with_a_command_that_runs(demo_folder, capsys):
    study = demo_folder / "wrenfield.study"
    code, out, err = run(capsys, "model", "train", study, "--question", "improve")
    assert code == 0, err
    command = out.strip().splitlines()[-1].split(": ", 1)[1]
    assert command.startswith("oecode model curve ")
    code, out, err = run(capsys, *shlex.split(command)[1:])
    assert code == 0, err
    assert "semi-automatic coding" in out and out.strip().splitlines()[-1].strip().startswith("oecode model apply ")
