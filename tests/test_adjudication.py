"""Adjudication on the double-coded demo study: differences side by side, decisions into `final`, undo.

Expected differences and agreed verbatims are worked out from demo/double-coded.csv directly.
"""

from __future__ import annotations

import pytest

from opencode.coding import adjudication as adj
from opencode.coding import assignments as coding
from opencode.coding import reliability as rel
from opencode.errors import BadInput, OpenCodeError
from opencode.study import survey_data
from opencode.study.store import Study


def respondent_ids(study: Study, question: str = "why") -> dict[str, int]:
    return survey_data.verbatims(study, question).set_index("respondent")["verbatim_id"].to_dict()


def final_hand(study: Study, verbatim_id: int) -> list[int]:
    return [a.number for a in coding.codes_of(study, verbatim_id, "final", ("hand",))]


def test_differences_match_the_file_and_show_labels(demo_copy, csv_sets):
    sets = csv_sets
    differ = sorted(r for r in sets["ash"] if sets["ash"][r] != sets["bryn"][r])
    with Study.open(demo_copy) as study:
        ids = respondent_ids(study)
        found = adj.differences(study, "why", ["ash", "bryn"])
        first_two = adj.differences(study, "why", "ash,bryn", limit=2)
        labels = rel.code_labels(study, "why")
    assert sorted(d.respondent for d in found) == differ
    assert [d.verbatim_id for d in found] == sorted(ids[r] for r in differ)
    one = found[0]
    assert one.codes == {"ash": tuple(sorted(sets["ash"][one.respondent])),
                         "bryn": tuple(sorted(sets["bryn"][one.respondent]))}
    assert one.final is None and one.text
    assert first_two == found[:2]
    text = adj.format_differences(first_two, labels)
    assert f"respondent {one.respondent}" in text and "final" in text and "not settled yet" in text
    assert labels[one.codes["ash"][0]] in text


def test_a_verbatim_one_coder_coded_is_not_a_difference(demo_copy):
    with Study.open(demo_copy) as study:
        lone = coding.uncoded_ids(study, "why", "ash", limit=1)[0]
        coding.assign(study, lone, 5, "ash")
        assert lone not in {d.verbatim_id for d in adj.differences(study, "why", "ash,bryn")}


def test_take_union_set_and_undo_write_final(demo_copy):
    with Study.open(demo_copy) as study:
        d = adj.differences(study, "why", "ash,bryn", limit=1)[0]
        v = d.verbatim_id
        assert adj.take(study, "why", v, "ash") == d.codes["ash"]
        assert final_hand(study, v) == list(d.codes["ash"])
        union = tuple(sorted(set(d.codes["ash"]) | set(d.codes["bryn"])))
        assert adj.take_union(study, "why", v, ["ash", "bryn"]) == union
        assert final_hand(study, v) == list(union)
        assert adj.set_final(study, "why", v, [d.codes["bryn"][0]]) == (d.codes["bryn"][0],)
        assert final_hand(study, v) == [d.codes["bryn"][0]]
        # every decision is audited as final's change and undone one at a time, newest first
        actions = study._db.execute("SELECT actor, action FROM audit WHERE actor = 'final'").fetchall()
        assert actions == [("final", "assign")] * 3
        assert adj.undo_last(study) == "assign"
        assert final_hand(study, v) == list(union)
        assert adj.differences(study, "why", "ash,bryn", limit=1)[0].final == union


def test_no_code_decision_is_settled_and_marked_done(demo_copy):
    with Study.open(demo_copy) as study:
        v = adj.differences(study, "why", "ash,bryn", limit=1)[0].verbatim_id
        adj.take(study, "why", v, "bryn")
        assert adj.set_final(study, "why", v, []) == ()
        assert final_hand(study, v) == [] and coding.is_done(study, v, "final")
        assert adj.differences(study, "why", "ash,bryn", limit=1)[0].final == ()


def test_bad_decisions_are_clear_errors(demo_copy):
    with Study.open(demo_copy) as study:
        d = adj.differences(study, "why", "ash,bryn", limit=1)[0]
        v = d.verbatim_id
        other = int(survey_data.verbatims(study, "improve")["verbatim_id"].iloc[0])
        lone = coding.uncoded_ids(study, "why", "ash", limit=1)[0]
        with pytest.raises(OpenCodeError, match=f"coder 'cy' has not coded respondent {d.respondent} on question"):
            adj.take(study, "why", v, "cy")
        with pytest.raises(OpenCodeError, match=f"verbatim id {other} is not an answer to question 'why'"):
            adj.take(study, "why", other, "ash")
        with pytest.raises(OpenCodeError, match="the frame has no code 77"):
            adj.set_final(study, "why", lone, [77])
        with pytest.raises(OpenCodeError, match="is a net"):
            adj.set_final(study, "why", lone, [90])
        assert study._db.execute("SELECT COUNT(*) FROM assignments WHERE coder = 'final'").fetchone()[0] == 0


def test_a_respondent_id_finds_its_verbatim_and_an_unknown_one_is_refused(demo_copy):
    with Study.open(demo_copy) as study:
        ids = respondent_ids(study)
        respondent = sorted(ids)[3]
        assert adj.verbatim_of_respondent(study, "why", respondent) == ids[respondent]
        assert adj.verbatim_of_respondent(study, "why", f" {respondent} ") == ids[respondent]
        with pytest.raises(BadInput, match=r"^respondent 'ZZ404' has no verbatim in question 'why'$"):
            adj.verbatim_of_respondent(study, "why", "ZZ404")
        with pytest.raises(OpenCodeError, match="no open question named 'wh'"):
            adj.verbatim_of_respondent(study, "wh", respondent)


def test_accept_agreed_settles_every_agreed_verbatim_in_one_undoable_step(demo_copy, csv_sets):
    sets = csv_sets
    agreed = {r: c for r, c in sets["ash"].items() if sets["bryn"][r] == c}
    with Study.open(demo_copy) as study:
        ids = respondent_ids(study)
        settled_first = ids[sorted(agreed)[0]]
        adj.set_final(study, "why", settled_first, [])  # final decided this one already: left alone
        count = adj.accept_agreed(study, "why", ["ash", "bryn"], actor="lead")
        assert count == len(agreed) - 1
        for r, codes in agreed.items():
            if ids[r] != settled_first:
                assert set(final_hand(study, ids[r])) == codes
        assert final_hand(study, settled_first) == []
        assert adj.accept_agreed(study, "why", "ash,bryn") == 0
        payload = study._db.execute("SELECT payload FROM audit WHERE actor = 'final' ORDER BY id DESC LIMIT 1"
                                   ).fetchone()[0]
        assert '"accept-agreed"' in payload and '"by": "lead"' in payload
        assert adj.undo_last(study) == "assign"
        in_final = study._db.execute("SELECT COUNT(DISTINCT verbatim_id) FROM assignments WHERE coder = 'final'"
                                    ).fetchone()[0]
        assert in_final == 0 and coding.is_done(study, settled_first, "final")


def test_accept_agreed_within_a_sample(demo_copy, csv_sets):
    sets = csv_sets
    with Study.open(demo_copy) as study:
        sample = rel.draw_sample(study, "why", "rel1", percent=25, random_state=9)
        respondents = survey_data.verbatims(study, "why").set_index("verbatim_id")["respondent"]
        inside = {respondents[v] for v in sample.verbatim_ids} & set(sets["ash"])
        expected = sum(sets["ash"][r] == sets["bryn"][r] for r in inside)
        assert adj.accept_agreed(study, "why", "ash,bryn", sample="rel1") == expected
        with pytest.raises(OpenCodeError, match="name at least 2 coders"):
            adj.accept_agreed(study, "why", "ash")
