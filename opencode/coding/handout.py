"""Coder copies without a server: hand a coder a copy of the study, merge their work back later.

`handout` writes a study file for one coder (other coders' codes on the coder's blind verbatims taken out,
with every rule and machine suggestion on those verbatims and every stored machine-coder model: a model
learned from the team's codes, blind ones included, would suggest them back) that remembers the coder's rows and the frame as they were. The coder codes in it with the desk as usual.
`merge` brings the coder's assignments, notes and done marks back into the study: a change the coder made
in the copy is applied when the study still holds what the copy started from. Where the frame changed
meanwhile (the code was relabelled, renumbered, moved to another net, retired or removed, or the copy made
a code of its own), or the same row changed in the study too, the change is not applied but listed as a
conflict (returned, printed by the command, and kept in the study's settings under
`handout.conflicts.CODER`): nothing is dropped silently. Merging the same copy twice changes nothing.
"""

from __future__ import annotations

import os
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from opencode.coding.history import Change
from opencode.errors import BadInput, NotAStudy
from opencode.study import handout_store as hstore
from opencode.study.store import Study, now
from opencode.study.transfer import save_copy

#: The copy's settings key holding what the copy started from.
HANDOUT_KEY = "handout"
CONFLICTS_KEY = "handout.conflicts.{}"


@dataclass
class HandoutReport:
    """What `handout` wrote."""

    coder: str
    path: Path
    assignments: int
    removed: dict[str, int]


@dataclass(frozen=True)
class Conflict:
    """A change in the copy that was not applied, and why."""

    question: str
    respondent: str
    verbatim_id: int
    what: str        # "code 3", "done mark", "note"
    change: str      # what the coder did in the copy: "added", "removed", "changed"
    reason: str


@dataclass
class MergeReport:
    """What `merge` did: changes applied per kind and the conflicts left for the lead."""

    coder: str
    added: int = 0
    removed: int = 0
    changed: int = 0
    marks: int = 0
    notes: int = 0
    conflicts: list[Conflict] = field(default_factory=list)

    @property
    def applied(self) -> int:
        return self.added + self.removed + self.changed + self.marks + self.notes


def handout(study: Study, coder: str, target: str | os.PathLike, *, actor: str = "oecode",
            overwrite: bool = False) -> HandoutReport:
    """Write a coder's copy of the study to `target` (a new .study file)."""
    coder = (coder or "").strip()
    if not coder:
        raise BadInput("name the coder the copy is for (--coder)")
    if coder == "final":
        raise BadInput("'final' holds the adjudicated codes; a handout is for one coder's own codes")
    uid = hstore.study_uid(study, create=True)
    base = {
        "coder": coder, "study_uid": uid, "issued_at": now(), "from": str(study.path),
        "assignments": [[v, c, s, conf] for (v, c), (s, conf) in sorted(hstore.coder_assignments(study, coder).items())],
        "marks": sorted(hstore.coder_marks(study, coder)),
        "notes": [[v, t] for v, t in sorted(hstore.coder_notes(study, coder).items())],
        "codes": {str(k): v for k, v in hstore.code_meanings(study).items()},
        # the coder's own suggestions left out of the copy: their absence there is not a removal to merge
        "withheld": [list(key) for key in hstore.own_blind_suggestions(study, coder)],
    }
    save_copy(study, target, overwrite=overwrite)
    with Study.open(target) as copy, copy.transaction():
        removed = hstore.redact_for(copy, coder)
        copy.set_setting(HANDOUT_KEY, base, actor=coder)
    with study.transaction():
        study.audit(actor, "handout", "coder", None, {"coder": coder, "to": str(Path(target).name)})
    return HandoutReport(coder, Path(target), len(base["assignments"]), removed)


def _read_handout(study: Study, copy_path: Path) -> tuple[Study, dict[str, Any]]:
    if not copy_path.is_file():
        raise BadInput(f"{copy_path}: no such coder copy")
    copy = Study.open(copy_path)
    base = copy.get_setting(HANDOUT_KEY)
    if not isinstance(base, dict) or "coder" not in base:
        copy.close()
        raise NotAStudy(f"{copy_path}: is a study but not a coder's copy (make one with oecode handout)")
    if base.get("study_uid") != hstore.study_uid(study):
        copy.close()
        raise BadInput(f"{copy_path}: is a copy of another study (it was handed out from {base.get('from')}), "
                       f"not of {study.path}")
    return copy, base


def merge(study: Study, copy_path: str | os.PathLike) -> MergeReport:
    """Bring a coder's assignments, notes and done marks back from their copy; conflicts listed, not applied."""
    copy_path = Path(copy_path)
    copy, base = _read_handout(study, copy_path)
    coder = base["coder"]
    try:
        then_codes = {int(k): v for k, v in base["codes"].items()}
        then_a = {(v, c): (s, conf) for v, c, s, conf in base["assignments"]}
        then_m = set(base["marks"])
        then_n = {v: t for v, t in base["notes"]}
        withheld = {(int(v), int(c)) for v, c in base.get("withheld", [])}
        copy_a = hstore.coder_assignments(copy, coder)
        copy_m = set(hstore.coder_marks(copy, coder))
        copy_n = hstore.coder_notes(copy, coder)
        copy_codes = hstore.code_meanings(copy)
    finally:
        copy.close()
    report = MergeReport(coder)
    pending: list[tuple[int, str, str, str]] = []  # verbatim, what, change, reason
    with study.transaction():
        now_a = hstore.coder_assignments(study, coder)
        now_codes = hstore.code_meanings(study)
        change = Change(study)
        stamp = now()
        for key in sorted(set(then_a) | set(copy_a)):
            was, wanted, held = then_a.get(key), copy_a.get(key), now_a.get(key)
            if wanted == was or held == wanted:
                continue  # not changed in the copy, or the study holds it already (a second merge)
            if wanted is None and key in withheld:
                continue  # a suggestion the copy never showed: the coder did not take it off
            verbatim_id, code_id = key
            kind = "added" if was is None else "removed" if wanted is None else "changed"
            number = (copy_codes.get(code_id) or then_codes.get(code_id) or {}).get("number", "?")
            reason = _frame_reason(code_id, then_codes.get(code_id), now_codes.get(code_id))
            if reason is None and held != was:
                reason = "changed in the study too since the handout"
            if reason is not None:
                pending.append((verbatim_id, f"code {number}", kind, reason))
                continue
            if wanted is None:
                change.remove_assignment(verbatim_id, code_id, coder)
                report.removed += 1
            else:
                source, confidence = wanted
                change.put_assignment({"verbatim_id": verbatim_id, "code_id": code_id, "coder": coder,
                                       "source": source, "confidence": confidence, "created_at": stamp})
                if kind == "added":
                    report.added += 1
                else:
                    report.changed += 1
        now_m = set(hstore.coder_marks(study, coder))
        for verbatim_id in sorted(then_m ^ copy_m):
            wanted = verbatim_id in copy_m
            if (verbatim_id in now_m) == wanted:
                continue
            if (verbatim_id in now_m) != (verbatim_id in then_m):
                pending.append((verbatim_id, "done mark", "added" if wanted else "removed",
                                "changed in the study too since the handout"))
                continue
            change.set_mark(verbatim_id, coder, stamp if wanted else None)
            report.marks += 1
        now_n = hstore.coder_notes(study, coder)
        for verbatim_id in sorted(set(then_n) | set(copy_n)):
            was, wanted, held = then_n.get(verbatim_id), copy_n.get(verbatim_id), now_n.get(verbatim_id)
            if wanted == was or held == wanted:
                continue
            if held != was:
                pending.append((verbatim_id, "note", "changed", "changed in the study too since the handout"))
                continue
            change.set_note(verbatim_id, coder, wanted, stamp)
            report.notes += 1
        change.commit(coder, "merge-handout", "coder", None, copy=copy_path.name, added=report.added,
                      removed=report.removed, changed=report.changed, marks=report.marks, notes=report.notes)
        places = hstore.verbatim_places(study, sorted({p[0] for p in pending}))
        report.conflicts = [Conflict(*places.get(v, ("?", "?")), v, what, kind, reason)
                            for v, what, kind, reason in pending]
        stored = [asdict(c) for c in report.conflicts]
        if study.get_setting(CONFLICTS_KEY.format(coder), []) != stored:
            study.set_setting(CONFLICTS_KEY.format(coder), stored, actor=coder)
    return report


def _frame_reason(code_id: int, then: dict[str, Any] | None, current: dict[str, Any] | None) -> str | None:
    """Why a code's assignment cannot be merged as it is (the frame changed since the handout), or None."""
    if then is None:
        return "a code made in the copy, not in the study's frame (the lead adds it, then codes it)"
    if current is None:
        return f"code {then['number']} ({then['label']}) was removed from the frame since the handout"
    if then == current:
        return None
    if current["active"] != then["active"] and not current["active"]:
        return f"code {then['number']} ({then['label']}) was retired since the handout"
    changed = [name for name in ("label", "number", "kind", "net_id", "frame_id", "active")
               if then[name] != current[name]]
    return f"code {then['number']} ({then['label']}) changed in the frame since the handout ({', '.join(changed)})"


def format_merge(report: MergeReport) -> str:
    """The merge report as plain text: counts, then each conflict on a line."""
    lines = [f"merged {report.coder}'s copy: {report.added} codes added, {report.removed} removed, "
             f"{report.changed} changed, {report.marks} done marks, {report.notes} notes"]
    if report.conflicts:
        lines.append(f"{len(report.conflicts)} conflicts, not applied (kept in the study as "
                     f"{CONFLICTS_KEY.format(report.coder)}):")
        for c in report.conflicts:
            lines.append(f"  {c.question} respondent {c.respondent}: {c.what} {c.change} in the copy; {c.reason}")
    return "\n".join(lines)

