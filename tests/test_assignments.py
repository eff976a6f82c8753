"""Assignments: per-coder undo / redo over the audit trail, suggestions never overriding hand codes, speed paths.

The property test replays random sequences of assign / unassign / bulk assign / undo / redo / merge / renumber / import
against a plain in-memory model (common practice for testing undo stacks; no published source).
"""

from __future__ import annotations

import copy
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from opencode.coding import assignments as A
from opencode.coding import frames, history
from opencode.coding.import_codes import import_codes
from opencode.errors import OpenCodeError

from helpers import make_text_study

N_VERBATIMS = 6


@pytest.fixture
def study(tmp_path):
    s = make_text_study(tmp_path, [f"answer number {i}" for i in range(N_VERBATIMS)])
    for number in (1, 2, 3):
        frames.add_code(s, "why", f"code {number}", number)
    yield s
    s.close()


def held(study, verbatim_id, coder="ash"):
    return [(c.number, c.source) for c in A.codes_of(study, verbatim_id, coder)]


def test_assign_toggle_accept_reject_and_suggestions_never_override(study):
    v = A.uncoded_ids(study, "why", "ash")
    assert A.assign(study, v[0], 1, "ash") is True
    assert A.assign(study, v[0], 1, "ash") is False
    assert A.assign(study, v[0], 1, "ash", source="machine", confidence=0.9) is False  # hand stays hand
    assert held(study, v[0]) == [(1, "hand")]
    A.assign(study, v[1], 2, "ash", source="rule")
    assert A.uncoded_ids(study, "why", "ash")[:1] == [v[1]]  # a suggestion alone is not coding
    assert A.toggle(study, v[1], 2, "ash") is True          # pressing the key accepts the suggestion
    assert held(study, v[1]) == [(2, "hand")]
    assert A.toggle(study, v[1], 2, "ash") is False
    A.assign(study, v[2], 3, "ash", source="machine", confidence=0.7)
    with pytest.raises(OpenCodeError, match="hand code of ash"):
        A.reject(study, v[0], 1, "ash")
    assert A.reject(study, v[2], 3, "ash") is True
    A.assign(study, v[2], 3, "ash", source="machine", confidence=0.7)
    assert A.accept(study, v[2], 3, "ash") is True and held(study, v[2]) == [(3, "hand")]
    assert A.code_counts(study, "why", "ash") == {1: 1, 3: 1}
    frames.add_code(study, "why", "net", 90, kind="net")
    with pytest.raises(OpenCodeError, match="is a net"):
        A.assign(study, v[0], 90, "ash")
    with pytest.raises(OpenCodeError, match="no code 42"):
        A.assign(study, v[0], 42, "ash")
    with pytest.raises(OpenCodeError, match="verbatim 99999: no such verbatim"):
        A.assign(study, 99999, 1, "ash")


def test_undo_redo_per_coder_and_new_change_clears_redo(study):
    v = A.uncoded_ids(study, "why", "ash")
    A.assign(study, v[0], 1, "ash")
    A.assign(study, v[0], 2, "bryn")
    A.assign(study, v[1], 2, "ash")
    assert history.undo(study, "ash") == "assign"
    assert held(study, v[1]) == [] and held(study, v[0], "bryn") == [(2, "hand")]
    assert history.redo(study, "ash") == "assign" and held(study, v[1]) == [(2, "hand")]
    history.undo(study, "ash")
    A.mark_done(study, v[3], "ash")
    assert history.redo(study, "ash") is None  # the new change cleared the redo stack
    assert history.undo(study, "ash") == "mark" and not A.is_done(study, v[3], "ash")
    A.set_note(study, v[0], "ash", "ask the lead")
    A.set_note(study, v[0], "ash", "asked")
    history.undo(study, "ash")
    assert A.note_of(study, v[0], "ash") == "ask the lead"
    assert history.undo(study, "nobody") is None


def everything(study) -> list[tuple]:
    """Every assignment row of every coder, all columns, in a fixed order."""
    return study._db.execute("SELECT verbatim_id, code_id, coder, source, confidence, created_at FROM assignments "
                            "ORDER BY verbatim_id, code_id, coder").fetchall()


def audit_rows(study) -> int:
    return study._db.execute("SELECT COUNT(*) FROM audit").fetchone()[0]


def test_assign_many_is_one_undoable_change(study):
    v = A.uncoded_ids(study, "why", "ash")
    A.assign(study, v[0], 1, "ash")                                    # already a hand code: skipped
    A.assign(study, v[1], 1, "ash", source="rule")                     # a rule suggestion: becomes hand
    A.assign(study, v[2], 1, "ash", source="machine", confidence=0.8)  # a machine suggestion: becomes hand
    A.assign(study, v[4], 2, "ash")                                    # another code of ash: stays
    A.assign(study, v[1], 1, "bryn", source="rule")                    # other coders: never touched
    A.assign(study, v[3], 2, "bryn")
    before, bryn_before, audits = everything(study), [r for r in everything(study) if r[2] == "bryn"], audit_rows(study)

    assert A.assign_many(study, [v[0], v[1], v[2], v[3], v[4], v[4]], 1, "ash") == 4
    after = everything(study)
    assert audit_rows(study) == audits + 1  # one audit row for the whole bulk change
    assert [held(study, x) for x in v[:5]] == [[(1, "hand")], [(1, "hand")], [(1, "hand")], [(1, "hand")],
                                               [(1, "hand"), (2, "hand")]]
    assert [r for r in after if r[2] == "bryn"] == bryn_before
    assert A.assignments(study, "why", ["ash"], ("hand",))["confidence"].isna().all()

    assert history.undo(study, "ash") == "assign"   # one undo takes the whole bulk change back...
    assert everything(study) == before             # ...to exactly the rows there were (sources, confidences, times)
    assert history.redo(study, "ash") == "assign"
    assert everything(study) == after
    history.undo(study, "ash")
    history.undo(study, "ash")                      # the next undo reaches the change before the bulk one
    assert held(study, v[4]) == [] and held(study, v[1]) == [(1, "rule")]
    assert A.assign_many(study, [v[0]], 1, "ash") == 0 and audit_rows(study) == audits + 1  # nothing: no audit row


def test_assign_many_suggestions_and_actor(study):
    v = A.uncoded_ids(study, "why", "ash")
    A.assign(study, v[0], 3, "final")
    assert A.assign_many(study, v[:3], 3, "final", source="rule", actor="lead") == 2
    assert [held(study, x, "final") for x in v[:3]] == [[(3, "hand")], [(3, "rule")], [(3, "rule")]]
    assert history.undo(study, "final") == "assign"  # the coder's own change, not the lead's bulk one
    assert held(study, v[0], "final") == []
    assert history.undo(study, "lead") == "assign"
    assert [held(study, x, "final") for x in v[:3]] == [[], [], []]


def test_assign_many_bad_inputs_write_nothing(study):
    v = A.uncoded_ids(study, "why", "ash")
    frames.add_code(study, "why", "net", 90, kind="net")
    audits = audit_rows(study)
    with pytest.raises(OpenCodeError, match="verbatim 99999: no such verbatim"):
        A.assign_many(study, [v[0], v[1], 99999], 1, "ash")  # all or nothing
    with pytest.raises(OpenCodeError, match="no code 42"):
        A.assign_many(study, v, 42, "ash")
    with pytest.raises(OpenCodeError, match="is a net"):
        A.assign_many(study, v, 90, "ash")
    with pytest.raises(OpenCodeError, match="coder name is needed"):
        A.assign_many(study, v, 1, " ")
    with pytest.raises(OpenCodeError, match="source 'guess'"):
        A.assign_many(study, v, 1, "ash", source="guess")
    assert everything(study) == [] and audit_rows(study) == audits
    assert A.assign_many(study, [], 1, "ash") == 0 and audit_rows(study) == audits


# -- property: no sequence loses or duplicates an assignment ---------------------------------------------------------
OPS = st.one_of(
    st.tuples(st.just("assign"), st.integers(0, N_VERBATIMS - 1), st.integers(1, 4)),
    st.tuples(st.just("unassign"), st.integers(0, N_VERBATIMS - 1), st.integers(1, 4)),
    st.tuples(st.just("undo")),
    st.tuples(st.just("redo")),
    st.tuples(st.just("merge"), st.integers(1, 4), st.integers(1, 4)),
    st.tuples(st.just("renumber"), st.integers(1, 4), st.integers(1, 6)),
    st.tuples(st.just("import"), st.lists(st.tuples(st.integers(0, N_VERBATIMS - 1), st.integers(1, 4)),
                                          min_size=1, max_size=4)),
    st.tuples(st.just("bulk"), st.lists(st.integers(0, N_VERBATIMS - 1), max_size=5), st.integers(1, 4)),
)


class Model:
    """The expected state: code identities by number, hand assignments as (verbatim, identity), done marks."""

    def __init__(self):
        self.state = {"numbers": {1: "a", 2: "b", 3: "c"}, "pairs": set(), "marks": set()}
        self.undo_stack: list = []
        self.redo_stack: list = []

    def change(self, new):
        if new != self.state:
            self.undo_stack.append(self.state)
            self.redo_stack.clear()
            self.state = new

    def apply(self, op):
        s = copy.deepcopy(self.state)
        numbers = s["numbers"]
        if op[0] in ("assign", "unassign") and op[2] in numbers:
            pair = (op[1], numbers[op[2]])
            (s["pairs"].add if op[0] == "assign" else s["pairs"].discard)(pair)
        elif op[0] == "merge" and op[1] in numbers and op[2] in numbers and op[1] != op[2]:
            gone, keep = numbers.pop(op[1]), numbers[op[2]]
            s["pairs"] = {(v, keep if ident == gone else ident) for v, ident in s["pairs"]}
        elif op[0] == "renumber" and op[1] in numbers and op[2] not in numbers:
            numbers[op[2]] = numbers.pop(op[1])
        elif op[0] == "bulk" and op[2] in numbers:
            s["pairs"] |= {(v, numbers[op[2]]) for v in op[1]}
        elif op[0] == "import" and all(n in numbers for _, n in op[1]):
            s["pairs"] |= {(v, numbers[n]) for v, n in op[1]}
            s["marks"] |= {v for v, _ in op[1]}
        elif op[0] == "undo" and self.undo_stack:
            self.redo_stack.append(self.state)
            self.state = self.undo_stack.pop()
            return
        elif op[0] == "redo" and self.redo_stack:
            self.undo_stack.append(self.state)
            self.state = self.redo_stack.pop()
            return
        if op[0] not in ("undo", "redo"):
            self.change(s)

    def expected(self):
        names = {ident: n for n, ident in self.state["numbers"].items()}
        return sorted((v, names[i]) for v, i in self.state["pairs"]), sorted(self.state["marks"])


def run_op(study, folder, vids, op):
    try:
        if op[0] == "assign":
            A.assign(study, vids[op[1]], op[2], "ash")
        elif op[0] == "unassign":
            A.unassign(study, vids[op[1]], op[2], "ash")
        elif op[0] == "bulk":
            A.assign_many(study, [vids[i] for i in op[1]], op[2], "ash")
        elif op[0] == "undo":
            history.undo(study, "ash")
        elif op[0] == "redo":
            history.redo(study, "ash")
        elif op[0] == "merge":
            frames.merge_codes(study, "why", op[1], op[2], actor="ash")
        elif op[0] == "renumber":
            frames.renumber_code(study, "why", op[1], op[2], actor="ash")
        else:
            path = Path(folder) / "codes.csv"
            path.write_text("rid,codes\n" + "".join(f"R{v},{n}\n" for v, n in op[1]))
            import_codes(study, "why", ["codes"], "ash", path, id_column="rid")
    except OpenCodeError:
        pass  # refused operations (unknown code, number taken) must change nothing; the model skips them too


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(OPS, min_size=1, max_size=14))
def test_no_sequence_loses_or_duplicates_an_assignment(ops):
    with tempfile.TemporaryDirectory(dir="/tmp") as folder:
        study = make_text_study(Path(folder), [f"answer {i}" for i in range(N_VERBATIMS)])
        for number in (1, 2, 3):
            frames.add_code(study, "why", f"code {number}", number, actor="setup")
        vids = A.uncoded_ids(study, "why", "ash")
        position = {v: i for i, v in enumerate(vids)}
        model = Model()
        for op in ops:
            run_op(study, folder, vids, op)
            model.apply(op)
            rows = A.assignments(study, "why", ["ash"])
            got = sorted((position[v], n) for v, n in zip(rows["verbatim_id"], rows["number"]))
            marks = sorted(position[v] for v in vids if A.is_done(study, v, "ash"))
            assert len(got) == len(set(got))
            assert (got, marks) == model.expected(), (op, ops)
        study.close()
