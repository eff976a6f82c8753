"""Reversible changes: every coding action is a list of small ops stored in the audit payload.

An op says what one row looked like before and after ("before" None = the row did not exist), so undo
writes the "before" states in reverse order and redo writes the "after" states in order. Audit `undone`
states: 0 live, 1 undone (on the actor's redo stack), 2 undone for good (a new change cleared the stack).
"""

from __future__ import annotations

import sqlite3
from typing import Any

from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import frames_store as fstore
from opencode.study.store import Study

LIVE, UNDONE, CLEARED = 0, 1, 2

#: Audit actions this module can reverse.
UNDOABLE = frozenset({
    "assign", "unassign", "toggle", "accept", "reject", "mark", "unmark", "note", "import-codes",
    "apply-rules", "apply-machine", "add-code", "edit-code", "net", "retire", "restore", "renumber", "merge",
    "delete-code", "import-frame", "set-rule", "merge-handout"})


class Change:
    """Collects the ops of one action while writing them; `commit` files them in the audit trail."""

    def __init__(self, study: Study):
        self.study = study
        self.ops: list[dict[str, Any]] = []

    # assignments: key = (verbatim_id, code_id, coder)
    def put_assignment(self, row: dict[str, Any]) -> None:
        """Insert or replace one assignment."""
        before = astore.get_assignment(self.study, row["verbatim_id"], row["code_id"], row["coder"])
        self._apply({"t": "a", "before": before, "after": dict(row)})

    def remove_assignment(self, verbatim_id: int, code_id: int, coder: str) -> bool:
        """Delete one assignment; False when there was none."""
        before = astore.get_assignment(self.study, verbatim_id, code_id, coder)
        if before is None:
            return False
        self._apply({"t": "a", "before": before, "after": None})
        return True

    # codes: key = id
    def put_code(self, row: dict[str, Any]) -> int:
        """Insert a new code (row without id) or change an existing one (row with id); returns the id."""
        if row.get("id") is None:
            code_id = fstore.insert_code(self.study, row)
            self.ops.append({"t": "c", "before": None, "after": fstore.code_row(self.study, code_id)})
            return code_id
        before = fstore.code_row(self.study, row["id"])
        after = {**before, **row}
        if after != before:
            self._apply({"t": "c", "before": before, "after": after})
        return int(row["id"])

    def remove_code(self, code_id: int) -> None:
        """Delete a code row (its assignments and children must have moved already)."""
        self._apply({"t": "c", "before": fstore.code_row(self.study, code_id), "after": None})

    # done marks and notes: key = (verbatim_id, coder)
    def set_mark(self, verbatim_id: int, coder: str, marked_at: str | None) -> bool:
        """Mark (a time) or unmark (None) a verbatim done; False when nothing changed."""
        before = astore.get_mark(self.study, verbatim_id, coder)
        if (before is None) == (marked_at is None):
            return False
        self._apply({"t": "m", "key": [verbatim_id, coder], "before": before, "after": marked_at})
        return True

    def set_note(self, verbatim_id: int, coder: str, text: str | None, at: str) -> bool:
        """Set or clear a note; False when nothing changed."""
        before = astore.get_note(self.study, verbatim_id, coder)
        if before == text:
            return False
        self._apply({"t": "n", "key": [verbatim_id, coder], "before": before, "after": text, "at": at})
        return True

    def _apply(self, op: dict[str, Any]) -> None:
        write(self.study, op, "after")
        self.ops.append(op)

    def commit(self, actor: str, action: str, entity: str, entity_id: int | None = None,
               **summary: Any) -> int | None:
        """File the change in the audit trail (nothing when no op) and clear the actor's redo stack."""
        if not self.ops:
            return None
        clear_redo(self.study, actor)
        return self.study.audit(actor, action, entity, entity_id, {"ops": self.ops, **summary})


def write(study: Study, op: dict[str, Any], side: str) -> None:
    """Make the row an op describes look like its `side` ("before" or "after")."""
    state = op[side]
    kind = op["t"]
    if kind == "a":
        if state is None:
            other = op["before" if side == "after" else "after"]
            astore.remove_assignment(study, other["verbatim_id"], other["code_id"], other["coder"])
        else:
            astore.put_assignment(study, state)
    elif kind == "c":
        if state is None:
            other = op["before" if side == "after" else "after"]
            fstore.delete_code(study, other["id"])
        elif fstore.code_row(study, state["id"]) is None:
            _reinsert_code(study, state)
        else:
            fstore.update_code(study, state["id"], state)
    elif kind == "m":
        verbatim_id, coder = op["key"]
        if state is None:
            astore.remove_mark(study, verbatim_id, coder)
        else:
            astore.put_mark(study, verbatim_id, coder, state)
    elif kind == "n":
        verbatim_id, coder = op["key"]
        astore.put_note(study, verbatim_id, coder, state, op["at"])
    else:
        raise ValueError(f"unknown op type {kind!r}")


def _reinsert_code(study: Study, row: dict[str, Any]) -> None:
    taken = fstore.code_by_number(study, row["frame_id"], row["number"])
    if taken is not None:
        raise OpenCodeError(f"cannot bring back code {row['number']} ({row['label']}): the number is now used by "
                            f"{taken['label']!r}")
    fstore.insert_code(study, row)


def _write_all(study: Study, ops, side: str, verb: str, action: str) -> None:
    try:
        for op in ops:
            write(study, op, side)
    except sqlite3.IntegrityError as error:
        raise OpenCodeError(f"cannot {verb} {action}: later changes by someone else depend on it ({error})") from error


def clear_redo(study: Study, actor: str) -> None:
    """Drop the actor's redo stack (called before filing any new change)."""
    stack = _redo_stack(study, actor)
    if stack:
        astore.set_undone(study, [audit_id for audit_id, _ in stack], CLEARED)


def _redo_stack(study: Study, actor: str) -> list[tuple[int, str]]:
    """The actor's undone-but-redoable (audit id, action), newest first (they sit above the newest live change)."""
    stack = []
    for audit_id, action, undone in astore.audit_newest_first(study, actor):
        if action not in UNDOABLE:
            continue
        if undone == UNDONE:
            stack.append((audit_id, action))
        elif undone == LIVE:
            break
    return stack


def _last_live(study: Study, actor: str) -> tuple[int, str] | None:
    for audit_id, action, undone in astore.audit_newest_first(study, actor):
        if action in UNDOABLE and undone == LIVE:
            return audit_id, action
    return None


def undo(study: Study, actor: str) -> str | None:
    """Reverse the actor's newest live change; returns its action name, or None when there is nothing to undo."""
    with study.transaction():
        found = _last_live(study, actor)
        if found is None:
            return None
        audit_id, action = found
        _write_all(study, reversed(astore.audit_payload(study, audit_id).get("ops", [])), "before", "undo", action)
        astore.set_undone(study, [audit_id], UNDONE)
    return action


def redo(study: Study, actor: str) -> str | None:
    """Re-apply the change the actor undid last; returns its action name, or None when there is nothing to redo."""
    with study.transaction():
        stack = _redo_stack(study, actor)
        if not stack:
            return None
        audit_id, action = stack[-1]
        _write_all(study, astore.audit_payload(study, audit_id).get("ops", []), "after", "redo", action)
        astore.set_undone(study, [audit_id], LIVE)
    return action
