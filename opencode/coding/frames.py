"""Code frames: codes with stable numbers, nets (one level of nesting), hotkeys, special and retired codes.

Every change is one transaction with an audit row holding reversible ops (see coding.history), so it can
be undone by the actor who made it. Renumbering and merging re-point every assignment.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any

from opencode.coding.history import Change
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import frames_store as fstore
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.files.textout import format_table
from opencode.coding.choices import KINDS, SPECIALS  # noqa: F401  (re-exported)

#: Keys the desk keeps for itself (moving, undo, search); hotkeys must be other single characters.
RESERVED_HOTKEYS = frozenset(" /?")
#: Editable code fields -> the column storing them.
FIELDS = {"label": "label", "description": "description", "include": "include_note", "exclude": "exclude_note",
          "examples": "examples", "hotkey": "hotkey", "special": "special", "rule": "rule"}


@dataclass
class Code:
    """One code or net of a frame."""

    id: int
    number: int
    label: str
    kind: str = "code"
    net: int | None = None            # number of the parent net
    description: str = ""
    include: str = ""
    exclude: str = ""
    examples: list[str] = field(default_factory=list)
    hotkey: str | None = None
    special: str | None = None
    active: bool = True
    rule: str = ""

    @property
    def is_net(self) -> bool:
        """True for a net (a grouping counted from its codes)."""
        return self.kind == "net"


@dataclass
class Frame:
    """A code frame: its name, the questions sharing it and its codes by number."""

    id: int
    name: str
    question_ids: list[int]
    codes: list[Code]

    def by_number(self) -> dict[int, Code]:
        """Codes keyed by number."""
        return {c.number: c for c in self.codes}

    def children(self, number: int) -> list[Code]:
        """Codes and nets directly under a net."""
        return [c for c in self.codes if c.net == number]

    def leaves_under(self, number: int) -> list[Code]:
        """Codes (not nets) under a net, through one nested level."""
        found = []
        for child in self.children(number):
            found += self.leaves_under(child.number) if child.is_net else [child]
        return found


def _to_code(row: dict[str, Any], numbers: dict[int, int]) -> Code:
    return Code(id=row["id"], number=row["number"], label=row["label"], kind=row["kind"],
                net=numbers.get(row["net_id"]), description=row["description"], include=row["include_note"],
                exclude=row["exclude_note"], examples=list(row["examples"]), hotkey=row["hotkey"],
                special=row["special"], active=row["active"], rule=row["rule"])


def frame_id(study: Study, question: str, create: bool = False) -> int:
    """The id of a question's frame; with create, make an empty frame named after the question if it has none."""
    variable = survey_data.get_question(study, question)
    found = fstore.frame_of_question(study, variable.id)
    if found is not None:
        return int(found[0])
    if not create:
        raise OpenCodeError(f"{study.path}: question {question!r} has no code frame yet "
                            "(add a code or import a frame first)")
    with study.transaction():
        new_id = fstore.frame_by_name(study, question) or fstore.insert_frame(study, question)
        fstore.attach_question(study, variable.id, new_id)
        study.audit("oecode", "create-frame", "frame", new_id, {"question": question})
    return new_id


def share_frame(study: Study, question: str, with_question: str, actor: str = "oecode") -> None:
    """Make `question` use the frame of `with_question` (for questions coded with one frame)."""
    target = frame_id(study, with_question)
    variable = survey_data.get_question(study, question)
    current = fstore.frame_of_question(study, variable.id)
    if current is not None and current[0] != target:
        if astore.question_has_assignments(study, variable.id):
            raise OpenCodeError(f"question {question!r} already has codes given in frame {current[1]!r}; "
                                "it cannot switch frames")
    with study.transaction():
        fstore.attach_question(study, variable.id, target)
        study.audit(actor, "share-frame", "frame", target, {"question": question, "with": with_question})


def load_frame(study: Study, question: str) -> Frame:
    """A question's frame with all its codes (retired ones included, flagged inactive)."""
    fid = frame_id(study, question)
    rows = fstore.code_rows(study, fid)
    numbers = {r["id"]: r["number"] for r in rows}
    name = fstore.frame_name(study, fid)
    return Frame(fid, name, fstore.questions_of_frame(study, fid), [_to_code(r, numbers) for r in rows])


def get_code(study: Study, question: str, number: int) -> Code:
    """One code by number; a clear error when the frame has no such code."""
    fid = frame_id(study, question)
    row = fstore.code_by_number(study, fid, int(number))
    if row is None:
        raise OpenCodeError(f"question {question!r}: the frame has no code {number}")
    parent = fstore.code_row(study, row["net_id"]) if row["net_id"] else None
    return _to_code(row, {parent["id"]: parent["number"]} if parent else {})


# -- validation -------------------------------------------------------------------------------------------------
def _check_hotkey(study: Study, fid: int, hotkey: str | None, number: int) -> None:
    if hotkey is None:
        return
    if len(hotkey) != 1 or hotkey in RESERVED_HOTKEYS or not hotkey.isprintable():
        raise OpenCodeError(f"code {number}: hotkey {hotkey!r} must be one printable character other than "
                            f"space, '/' and '?'")
    holder = fstore.code_by_hotkey(study, fid, hotkey)
    if holder is not None and holder["number"] != number:
        raise OpenCodeError(f"code {number}: hotkey {hotkey!r} is already used by code {holder['number']} "
                            f"({holder['label']})")


def _check_special(number: int, special: str | None) -> None:
    if special is not None and special not in SPECIALS:
        raise OpenCodeError(f"code {number}: special {special!r} is not one of {', '.join(SPECIALS)}")


def _check_number(study: Study, fid: int, number: int) -> None:
    if number < 1:
        raise OpenCodeError(f"code number {number}: code numbers are whole numbers from 1 up")
    holder = fstore.code_by_number(study, fid, number)
    if holder is not None:
        raise OpenCodeError(f"code number {number} is already taken by {holder['label']!r}")


def _parent_id(study: Study, fid: int, number: int, kind: str, net: int | None) -> int | None:
    """Check that `net` may be the parent of code `number` (nets nest one level, no cycles); its id."""
    if net is None:
        return None
    if net == number:
        raise OpenCodeError(f"code {number}: a net cannot contain itself")
    parent = fstore.code_by_number(study, fid, net)
    if parent is None:
        raise OpenCodeError(f"code {number}: net {net} does not exist in the frame")
    if parent["kind"] != "net":
        raise OpenCodeError(f"code {number}: {net} ({parent['label']}) is a code, not a net")
    grand = fstore.code_row(study, parent["net_id"]) if parent["net_id"] else None
    if grand is not None and grand["number"] == number:
        raise OpenCodeError(f"code {number}: putting it under net {net} would make a cycle ({net} is inside {number})")
    if kind == "net":
        if grand is not None:
            raise OpenCodeError(f"net {number}: net {net} is itself inside net {grand['number']}; nets nest only "
                                "one level")
        me = fstore.code_by_number(study, fid, number)
        if me is not None and any(c["kind"] == "net" for c in fstore.children_of(study, me["id"])):
            raise OpenCodeError(f"net {number}: it holds nets of its own, so it cannot go inside net {net} "
                                "(nets nest only one level)")
    return int(parent["id"])


# -- changes ----------------------------------------------------------------------------------------------------
def add_code(study: Study, question: str, label: str, number: int | None = None, *, kind: str = "code",
             net: int | None = None, hotkey: str | None = None, description: str = "", include: str = "",
             exclude: str = "", examples: list[str] | tuple[str, ...] = (), special: str | None = None,
             rule: str = "", actor: str = "oecode") -> Code:
    """Add a code (or a net) to a question's frame; the number defaults to one past the highest."""
    fid = frame_id(study, question, create=True)
    with study.transaction():
        number = fstore.max_number(study, fid) + 1 if number is None else int(number)
        if not label.strip():
            raise OpenCodeError(f"code {number}: the label is empty")
        if kind not in KINDS:
            raise OpenCodeError(f"code {number}: kind {kind!r} is not one of {', '.join(KINDS)}")
        _check_number(study, fid, number)
        _check_hotkey(study, fid, hotkey, number)
        _check_special(number, special)
        change = Change(study)
        change.put_code({"frame_id": fid, "number": number, "label": label.strip(), "kind": kind,
                         "net_id": _parent_id(study, fid, number, kind, net), "description": description,
                         "include_note": include, "exclude_note": exclude, "examples": list(examples),
                         "hotkey": hotkey, "special": special, "active": True, "rule": rule})
        change.commit(actor, "add-code", "code", None, question=question, number=number)
    return get_code(study, question, number)


def edit_code(study: Study, question: str, number: int, actor: str = "oecode", **fields: Any) -> Code:
    """Change a code's label, description, include/exclude notes, examples, hotkey, special or rule."""
    unknown = set(fields) - set(FIELDS)
    if unknown:
        raise OpenCodeError(f"code {number}: cannot edit {', '.join(sorted(unknown))} "
                            f"(editable: {', '.join(FIELDS)})")
    code = get_code(study, question, number)
    fid = frame_id(study, question)
    if "hotkey" in fields:
        fields["hotkey"] = fields["hotkey"] or None
        _check_hotkey(study, fid, fields["hotkey"], number)
    if "special" in fields:
        fields["special"] = fields["special"] or None
        _check_special(number, fields["special"])
    if "label" in fields and not str(fields["label"]).strip():
        raise OpenCodeError(f"code {number}: the label is empty")
    if "examples" in fields:
        fields["examples"] = list(fields["examples"])
    with study.transaction():
        change = Change(study)
        change.put_code({"id": code.id, **{FIELDS[k]: v for k, v in fields.items()}})
        change.commit(actor, "set-rule" if set(fields) == {"rule"} else "edit-code", "code", code.id,
                      question=question, number=number)
    return get_code(study, question, number)


def set_net(study: Study, question: str, number: int, net: int | None, actor: str = "oecode") -> Code:
    """Put a code or net inside a net (None takes it out)."""
    code = get_code(study, question, number)
    fid = frame_id(study, question)
    with study.transaction():
        change = Change(study)
        change.put_code({"id": code.id, "net_id": _parent_id(study, fid, number, code.kind, net)})
        change.commit(actor, "net", "code", code.id, question=question, number=number, net=net)
    return get_code(study, question, number)


def retire_code(study: Study, question: str, number: int, actor: str = "oecode", active: bool = False) -> Code:
    """Retire a code (kept with its assignments, no longer offered for coding); active=True restores it."""
    code = get_code(study, question, number)
    with study.transaction():
        change = Change(study)
        change.put_code({"id": code.id, "active": active})
        change.commit(actor, "restore" if active else "retire", "code", code.id, question=question, number=number)
    return get_code(study, question, number)


def renumber_code(study: Study, question: str, number: int, new_number: int, actor: str = "oecode") -> Code:
    """Give a code a new number; assignments follow (they point at the code, not at its number)."""
    code = get_code(study, question, number)
    fid = frame_id(study, question)
    if int(new_number) == code.number:
        return code
    _check_number(study, fid, int(new_number))
    with study.transaction():
        change = Change(study)
        change.put_code({"id": code.id, "number": int(new_number)})
        change.commit(actor, "renumber", "code", code.id, question=question, number=number, new_number=new_number)
    return get_code(study, question, new_number)


def _move_assignments(study: Study, change: Change, source_id: int, target_id: int) -> int:
    """Re-point every assignment of one code to another without making duplicates; how many moved."""
    moved = 0
    for row in astore.assignments_of_code(study, source_id):
        change.remove_assignment(row["verbatim_id"], source_id, row["coder"])
        existing = astore.get_assignment(study, row["verbatim_id"], target_id, row["coder"])
        if existing is None:
            change.put_assignment({**row, "code_id": target_id})
            moved += 1
        elif existing["source"] != "hand" and row["source"] == "hand":
            change.put_assignment({**existing, "source": "hand", "confidence": None})
    return moved


def merge_codes(study: Study, question: str, number: int, into: int, actor: str = "oecode") -> Code:
    """Merge code `number` into code `into`: its assignments (and children, for nets) move; it is removed."""
    source = get_code(study, question, number)
    target = get_code(study, question, into)
    if source.number == target.number:
        raise OpenCodeError(f"code {number}: cannot merge a code into itself")
    if not target.active:
        raise OpenCodeError(f"code {number}: cannot merge into code {into} ({target.label}): it is retired "
                            "(restore it first)")
    if source.kind != target.kind:
        raise OpenCodeError(f"code {number}: cannot merge a {source.kind} into a {target.kind} ({into})")
    fid = frame_id(study, question)
    with study.transaction():
        change = Change(study)
        moved = _move_assignments(study, change, source.id, target.id)
        for child in fstore.children_of(study, source.id):
            if child["id"] != target.id:
                _parent_id(study, fid, child["number"], child["kind"], into)
                change.put_code({"id": child["id"], "net_id": target.id})
        if target.net == source.number:
            change.put_code({"id": target.id, "net_id": fstore.code_row(study, source.id)["net_id"]})
        change.remove_code(source.id)
        if source.hotkey and not target.hotkey:
            change.put_code({"id": target.id, "hotkey": source.hotkey})
        change.commit(actor, "merge", "code", target.id, question=question, number=number, into=into, moved=moved)
    return get_code(study, question, into)


def delete_code(study: Study, question: str, number: int, merge_into: int | None = None,
                actor: str = "oecode") -> None:
    """Delete a code; one in use (or a net with members) needs a merge target, which receives its assignments."""
    code = get_code(study, question, number)
    if merge_into is not None:
        merge_codes(study, question, number, merge_into, actor)
        return
    uses = astore.count_of_code(study, code.id)
    if uses:
        raise OpenCodeError(f"code {number} ({code.label}) is used by {uses} assignments; name a code to merge "
                            "them into (or retire it instead)")
    if fstore.children_of(study, code.id):
        raise OpenCodeError(f"net {number} ({code.label}) still holds codes; move them out or merge the net")
    with study.transaction():
        change = Change(study)
        change.remove_code(code.id)
        change.commit(actor, "delete-code", "code", code.id, question=question, number=number)


_LABEL_SPACE = re.compile(r"\s+")


def label_key(label: str) -> str:
    """How labels are compared when matching imported codes: case and spacing ignored."""
    return _LABEL_SPACE.sub(" ", str(label)).strip().casefold()


def frame_records(frame: Frame, counts: dict[int, int] | None = None) -> list[dict]:
    """Every code and net in frame order (a net above its codes) with all its fields, and `count` when counts
    are given: the frame as rows for CSV or JSON."""
    records = []
    for code, _ in _in_frame_order(frame):
        record = {name: getattr(code, name) for name in ("number", "label", "kind", "net", "description", "include",
                                                         "exclude", "hotkey", "special", "active", "rule")}
        record["examples"] = "; ".join(code.examples)
        if counts is not None:
            record["count"] = None if code.is_net else counts.get(code.number, 0)
        records.append(record)
    return records


def _in_frame_order(frame: Frame) -> list[tuple[Code, int]]:
    """(code, depth under nets) in frame order: each net followed by its codes, by number."""
    depth: dict[int, int] = {}
    by_number = frame.by_number()

    def level(number: int) -> int:
        if number not in depth:
            parent = by_number[number].net
            depth[number] = 0 if parent is None or parent not in by_number else level(parent) + 1
        return depth[number]

    ordered: list = []

    def walk(parent: int | None) -> None:
        for code in sorted((c for c in frame.codes if c.net == parent), key=lambda c: c.number):
            ordered.append(code)
            if code.is_net:
                walk(code.number)

    walk(None)
    return [(c, level(c.number)) for c in ordered]


def format_frame(frame: Frame, counts: dict[int, int] | None = None) -> str:
    """A frame as a table: number, label (indented under its net), kind, hotkey, special, state, count."""
    rows = []
    for c, depth in _in_frame_order(frame):
        count = None if counts is None else (counts.get(c.number, 0) if not c.is_net else None)
        rows.append([c.number, "  " * depth + c.label, c.kind, c.hotkey or "", c.special or "",
                     "active" if c.active else "retired", "yes" if c.rule else "", count])
    headers = ["code", "label", "kind", "key", "special", "state", "rule", "count"]
    if counts is None:
        headers, rows = headers[:-1], [r[:-1] for r in rows]
    return format_table(headers, rows, note="in code-frame order (a net above its codes)")
