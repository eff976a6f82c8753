"""Keyword rules: the recursive-descent parser, evaluation through the real analyzer, dry run and pre-coding."""

from __future__ import annotations

import numpy as np
import pytest

from opencode.coding import assignments as A
from opencode.coding import frames, history, rules
from opencode.errors import OpenCodeError
from opencode.text.analyzer import Analyzer
from helpers import make_text_study


class Splitter:
    """A tiny stand-in analyzer (lower-case words) so parser logic is tested apart from stemming."""

    def analyze(self, text):
        return [w for w in text.lower().replace(",", " ").split() if w != "the"]


DOCS = [["car", "park", "full"], ["no", "staff", "at", "night"], ["staff", "car", "park"], ["open", "late"],
        ["park", "x", "y", "car"]]


@pytest.mark.parametrize("rule, expected", [
    ("car", [1, 0, 1, 0, 1]),
    ("car AND staff", [0, 0, 1, 0, 0]),
    ("car OR night", [1, 1, 1, 0, 1]),
    ("car AND NOT staff", [1, 0, 0, 0, 1]),
    ("NOT car AND park", [0, 0, 0, 0, 0]),
    ("(staff OR open) AND NOT (car OR late)", [0, 1, 0, 0, 0]),
    ('"car park"', [1, 0, 1, 0, 0]),
    ('"park car"', [0, 0, 0, 0, 0]),
    ("car NEAR/1 park", [1, 0, 1, 0, 0]),
    ("car NEAR/3 park", [1, 0, 1, 0, 1]),
    ("(car OR staff) NEAR/1 night", [0, 0, 0, 0, 0]),
    ("staff NEAR/1 (car OR night)", [0, 0, 1, 0, 0]),
    ("a OR b AND c", [0, 0, 0, 0, 0]),
])
def test_parser_and_evaluation(rule, expected):
    assert rules.parse_rule(rule, Splitter()).match(DOCS).astype(int).tolist() == expected


def test_precedence_or_binds_looser_than_and():
    tree = rules.parse_rule("car OR staff AND night", Splitter()).tree
    assert isinstance(tree, rules.AnyOf) and isinstance(tree.parts[1], rules.AllOf)


@pytest.mark.parametrize("rule, message", [
    ("", "position 1: the rule is empty"),
    ("car AND", "position 8: the rule ends where a word"),
    ("(car OR park", "position 1: this '\\(' is never closed"),
    ("car)", "position 4: .*'\\)' without a matching"),
    ('car AND "park', "position 9: this quote is never closed"),
    ("car park", "position 5: expected AND, OR, NEAR/n or the end, found 'park'"),
    ("car NEAR/0 park", "position 5: 'NEAR/0'"),
    ("car NEAR park", "position 5: 'NEAR'"),
    ("(car AND x) NEAR/2 park", "NEAR/2 joins words"),
    ("NOT car AND NOT park", "only NOT parts"),
    ("the", "position 1: 'the' has no terms"),
])
def test_errors_name_the_code_and_position(rule, message):
    with pytest.raises(OpenCodeError, match=f"code 7 rule, {message}" if message[0] == "p" else message):
        rules.parse_rule(rule, Splitter(), code=7)


def test_terms_match_through_the_real_analyzer():
    analyzer = Analyzer()
    lists = [analyzer.tokens(t) for t in ["Parking was impossible", "I parked badly", "the park is lovely",
                                           "opening hours too short", "we open at 9"]]
    assert rules.parse_rule("parking", analyzer).match(lists).tolist() == [True, True, True, False, False]
    assert rules.parse_rule('"opening hours"', analyzer).match(lists).tolist() == [False, False, False, True, False]


def test_dry_run_and_apply_never_touch_hand_codes(tmp_path):
    study = make_text_study(tmp_path, ["parking is a nightmare", "no parking spaces near the branch", "staff are kind",
                                  "car park too small", "parking parking parking"])
    frames.add_code(study, "why", "Parking", 1, rule="parking OR (car NEAR/1 park)")
    frames.add_code(study, "why", "Staff", 2)
    v = A.uncoded_ids(study, "why", "ash")
    hits = rules.rule_hits(study, "why", "parking")
    assert hits.count == 4 and hits.total == 5 and study._db.execute("SELECT COUNT(*) FROM assignments").fetchone()[0] == 0
    A.assign(study, v[0], 1, "ash")          # already hand-coded
    A.mark_done(study, v[4], "ash")          # finished by a person with no code
    assert rules.apply_rules(study, "why", coder="ash") == {1: 2}
    sources = {(r.verbatim_id, r.number): r.source for r in A.assignments(study, "why", ["ash"]).itertuples()}
    assert sources == {(v[0], 1): "hand", (v[1], 1): "rule", (v[3], 1): "rule"}
    assert rules.apply_rules(study, "why", coder="ash") == {1: 2}  # re-running replaces, never duplicates
    assert len(A.assignments(study, "why", ["ash"])) == 3
    history.undo(study, "ash")
    history.undo(study, "ash")
    assert set(A.assignments(study, "why", ["ash"])["source"]) == {"hand"}
    with pytest.raises(OpenCodeError, match="code 2 rule, position 9"):
        rules.set_rule(study, "why", 2, "staff OR")
    study.close()


def test_rule_on_empty_corpus_gives_empty_mask():
    assert rules.parse_rule("car", Splitter()).match([]).shape == (0,)
    assert np.array_equal(rules.parse_rule("NOT car AND park", Splitter()).match([["park"]]), [True])
