"""Coder copies without a server: handout, code offline, merge back; conflicts only where the frame changed
(or the same row changed in the study too), listed and kept, never dropped; merging twice changes nothing."""

from __future__ import annotations

import shutil

import pytest

from opencode.cli import main
from opencode.coding import assignments as coding
from opencode.coding import frames, history, machine_coding, reliability
from opencode.coding.handout import CONFLICTS_KEY, HANDOUT_KEY, handout, merge
from opencode.errors import BadInput, NotAStudy, OpenCodeError
from opencode.study import desk_queries as dq
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.study.transfer import same_rows, table_rows
from team_server import study_name


def _free_codes(study: Study) -> list[int]:
    return [c.number for c in frames.load_frame(study, "why").codes if not c.is_net and c.active]


@pytest.fixture
def lead_study(demo_copy):
    """The double-coded demo with a blind sample for kit and bryn, and two codes kit gave before the handout."""
    with Study.open(demo_copy) as study:
        reliability.draw_sample(study, "why", "blind", n=30, random_state=1, actor="lead")
        reliability.assign_sample(study, "why", "blind", ["kit", "bryn"])
        ids = survey_data.verbatims(study, "why", include_nonanswers=False)["verbatim_id"].tolist()
        blind = set(reliability.blind_verbatim_ids(study, "why", "kit").tolist())
        free = [v for v in ids if v not in blind]
        a, b = _free_codes(study)[:2]
        coding.assign(study, free[0], a, "kit")
        coding.assign(study, free[1], b, "kit")
    return demo_copy, free, sorted(blind)


def test_a_handout_hides_what_the_coder_must_not_see(lead_study, tmp_path):
    path, free, blind = lead_study
    with Study.open(path) as study:
        report = handout(study, "kit", tmp_path / "kit.study", actor="lead")
        others_on_blind = sum(len(dq.other_coders_codes(study, v, "kit")) for v in blind)
        coded_outside = next(v for v in free if dq.other_coders_codes(study, v, "kit"))
    assert report.assignments == 2 and report.removed["blind codes"] == others_on_blind > 0
    with Study.open(tmp_path / "kit.study") as copy:
        assert all(dq.other_coders_codes(copy, v, "kit") == [] for v in blind)
        assert dq.other_coders_codes(copy, coded_outside, "kit")  # outside the sample the team's codes travel along
        actors = {row[2] for row in table_rows(copy, "audit")}
        assert actors <= {"kit"}
        assert copy.get_setting(HANDOUT_KEY)["coder"] == "kit"


def test_a_handout_leaves_out_models_and_suggestions_on_the_blind_sample(lead_study, tmp_path, capsys):
    path, free, blind = lead_study
    with Study.open(path) as study:
        machine_coding.train(study, "why")  # learns from the team's codes, the blind sample's included
        models = len(table_rows(study, "models"))
        a, b = _free_codes(study)[:2]
        coding.assign(study, blind[0], a, "kit", source="machine", confidence=0.9)  # kit's own suggestions
        coding.assign(study, blind[1], b, "kit", source="rule")                     # on the blind sample
    copy = tmp_path / "kit.study"
    assert main(["handout", str(path), "--coder", "kit", "--out", str(copy)]) == 0
    printed = capsys.readouterr().out
    assert models > 0 and f"{models} stored machine-coder models left out" in printed
    assert "2 rule/machine suggestions on their blind sample left out" in printed
    with Study.open(copy) as study:
        assert table_rows(study, "models") == []
        on_blind = [row for row in table_rows(study, "assignments") if row[1] in set(blind)]
        assert all(row[3] == "kit" and row[4] == "hand" for row in on_blind)
        with pytest.raises(OpenCodeError, match="no machine coder"):
            machine_coding.suggest(study, "why", coder="kit")
        coding.assign(study, blind[0], a, "kit")  # kit codes the sample from the text: the suggestion becomes hand
        coding.assign(study, free[2], b, "kit")
    with Study.open(path) as study:
        report = merge(study, copy)
        assert report.conflicts == [] and (report.added, report.changed, report.removed) == (1, 1, 0)
        assert [(x.number, x.source) for x in coding.codes_of(study, blind[0], "kit")] == [(a, "hand")]
        assert [(x.number, x.source) for x in coding.codes_of(study, blind[1], "kit")] == [(b, "rule")]  # kept
        assert [x.number for x in coding.codes_of(study, free[2], "kit")] == [b]
        assert len(table_rows(study, "models")) == models  # the study keeps its models
    with Study.open(path) as study:
        assert merge(study, copy).applied == 0


def test_merge_brings_the_coders_work_back_and_lists_frame_conflicts(lead_study, tmp_path):
    path, free, _ = lead_study
    with Study.open(path) as study:
        handout(study, "kit", tmp_path / "kit.study", actor="lead")
        codes = _free_codes(study)
    a, b, c, d = codes[:4]
    with Study.open(tmp_path / "kit.study") as copy:  # kit codes offline
        coding.assign(copy, free[2], c, "kit")          # plain new code: applied
        coding.assign(copy, free[3], d, "kit")          # a code the lead relabels meanwhile: conflict
        coding.unassign(copy, free[1], b, "kit")        # taking a code off: applied
        coding.mark_done(copy, free[2], "kit")
        coding.set_note(copy, free[2], "kit", "sarcastic?")
        coding.set_note(copy, free[4], "kit", "copy's note")
        new = frames.add_code(copy, "why", "Kit's own idea", actor="kit")
        coding.assign(copy, free[6], new.number, "kit")  # a code made in the copy: conflict
    with Study.open(path) as study:                   # meanwhile, in the study
        frames.edit_code(study, "why", d, actor="lead", label="Relabelled while kit was away")
        coding.set_note(study, free[4], "kit", "study's note")  # the same row changed here too: conflict
        report = merge(study, tmp_path / "kit.study")
        assert (report.added, report.removed, report.marks, report.notes) == (1, 1, 1, 1)
        held = {(x.number) for x in coding.codes_of(study, free[2], "kit")}
        assert held == {c} and coding.is_done(study, free[2], "kit")
        assert coding.note_of(study, free[2], "kit") == "sarcastic?"
        assert coding.codes_of(study, free[1], "kit") == []
        assert coding.codes_of(study, free[3], "kit") == []       # not applied: listed instead
        assert coding.note_of(study, free[4], "kit") == "study's note"
        reasons = {x.what: x.reason for x in report.conflicts}
        assert len(report.conflicts) == 3
        assert "changed in the frame since the handout (label)" in reasons[f"code {d}"]
        assert "made in the copy" in reasons[f"code {new.number}"]
        assert reasons["note"] == "changed in the study too since the handout"
        kept = study.get_setting(CONFLICTS_KEY.format("kit"))
        assert len(kept) == 3 and all(k["respondent"] for k in kept)


def test_merging_the_same_copy_twice_changes_nothing(lead_study, tmp_path):
    path, free, _ = lead_study
    with Study.open(path) as study:
        handout(study, "kit", tmp_path / "kit.study", actor="lead")
        number = _free_codes(study)[2]
    with Study.open(tmp_path / "kit.study") as copy:
        coding.assign(copy, free[2], number, "kit")
        coding.mark_done(copy, free[3], "kit")
    with Study.open(path) as study:
        first = merge(study, tmp_path / "kit.study")
    assert first.applied == 2
    snapshot = tmp_path / "after-first.study"
    shutil.copyfile(path, snapshot)
    with Study.open(path) as study:
        second = merge(study, tmp_path / "kit.study")
    assert second.applied == 0 and second.conflicts == []
    with Study.open(path) as study, Study.open(snapshot) as before:
        assert same_rows(study, before) == []  # not even an audit row


def test_the_coder_can_undo_a_merge_like_any_change(lead_study, tmp_path):
    path, free, _ = lead_study
    with Study.open(path) as study:
        handout(study, "kit", tmp_path / "kit.study", actor="lead")
        number = _free_codes(study)[2]
    with Study.open(tmp_path / "kit.study") as copy:
        coding.assign(copy, free[2], number, "kit")
    with Study.open(path) as study:
        merge(study, tmp_path / "kit.study")
        assert history.undo(study, "kit") == "merge-handout"
        assert coding.codes_of(study, free[2], "kit") == []


def test_merge_refuses_a_copy_of_another_study_or_a_plain_study(lead_study, demo_base, tmp_path):
    path, _, _ = lead_study
    other = tmp_path / "other.study"
    shutil.copyfile(demo_base, other)
    with Study.open(other) as study:
        handout(study, "kit", tmp_path / "other-kit.study", actor="lead")
    with Study.open(path) as study:
        handout(study, "kit", tmp_path / "kit.study", actor="lead")  # gives this study its identity
        with pytest.raises(BadInput, match="copy of another study"):
            merge(study, tmp_path / "other-kit.study")
        with pytest.raises(NotAStudy, match="not a coder's copy"):
            merge(study, other)
        with pytest.raises(BadInput, match="no such coder copy"):
            merge(study, tmp_path / "absent.study")
        with pytest.raises(BadInput, match="adjudicated"):
            handout(study, "final", tmp_path / "final.study")


def test_handout_and_merge_from_the_command_line(lead_study, tmp_path, capsys):
    path, free, _ = lead_study
    copy = tmp_path / "kit.study"
    assert main(["handout", str(path), "--coder", "kit", "--out", str(copy)]) == 0
    printed = capsys.readouterr().out
    assert "2 of their codes" in printed and "left out" in printed
    assert main(["handout", str(path), "--coder", "kit", "--out", str(copy)]) == 1  # will not overwrite
    assert "already exists" in capsys.readouterr().err
    with Study.open(copy) as study:
        coding.mark_done(study, free[7], "kit")
    assert main(["merge", str(path), str(copy)]) == 0
    assert "1 done marks" in capsys.readouterr().out


def test_a_server_study_hands_out_and_merges_back(pg_server, demo_copy, tmp_path, capsys):
    address = pg_server.address(study=study_name("handout"))
    assert main(["push", str(demo_copy), address]) == 0
    copy = tmp_path / "kit.study"
    assert main(["handout", address, "--coder", "kit", "--out", str(copy)]) == 0
    with Study.open(copy) as study:
        verbatim = int(survey_data.verbatims(study, "why", include_nonanswers=False)["verbatim_id"].iloc[9])
        coding.assign(study, verbatim, _free_codes(study)[0], "kit")
        coding.set_note(study, verbatim, "kit", "done on the train")
    capsys.readouterr()
    assert main(["merge", address, str(copy)]) == 0
    assert "1 codes added" in capsys.readouterr().out
    with Study.open(address) as study:
        assert coding.note_of(study, verbatim, "kit") == "done on the train"
    assert main(["merge", address, str(copy)]) == 0
    assert "0 codes added" in capsys.readouterr().out
