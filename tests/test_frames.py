"""Code frames: numbers, hotkeys, nets, merge / renumber / retire / delete, CSV and JSON round trips, codebook."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from opencode.coding import assignments as A
from opencode.coding import codebook, frame_io, frames, history
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.resources import demo_dir
from opencode.study.store import Study

TEXTS = ["no staff at night feels unsafe", "great for working people", "waste of money", "call me on 07700 900123",
         "students need study space", "dont know"]


@pytest.fixture
def study(tmp_path: Path):
    source = tmp_path / "s.csv"
    with open(source, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "why", "age"])
        writer.writerows([[f"R{i}", t, i % 3] for i, t in enumerate(TEXTS)])
    import_survey(tmp_path / "t.study", source, ImportOptions(id_column="rid", questions=["why"]))
    with Study.open(tmp_path / "t.study") as s:
        yield s


def ids(study):
    return A.uncoded_ids(study, "why", "nobody")


def test_add_and_bad_inputs(study):
    frames.add_code(study, "why", "Safety", 1, hotkey="s")
    frames.add_code(study, "why", "Concerns", 90, kind="net")
    code = frames.add_code(study, "why", "Cost", hotkey="c", net=90)
    assert code.number == 91 and code.net == 90
    with pytest.raises(OpenCodeError, match="code number 1 is already taken by 'Safety'"):
        frames.add_code(study, "why", "Other", 1)
    with pytest.raises(OpenCodeError, match="hotkey 's' is already used by code 1"):
        frames.add_code(study, "why", "Other", 5, hotkey="s")
    with pytest.raises(OpenCodeError, match="91 .* is a code, not a net"):
        frames.add_code(study, "why", "Other", 6, net=91)
    frames.add_code(study, "why", "Inner", 80, kind="net", net=90)
    with pytest.raises(OpenCodeError, match="nest only one level"):
        frames.add_code(study, "why", "Deeper", 70, kind="net", net=80)
    with pytest.raises(OpenCodeError, match="cycle"):
        frames.set_net(study, "why", 90, 80)
    with pytest.raises(OpenCodeError, match="cannot contain itself"):
        frames.set_net(study, "why", 90, 90)
    with pytest.raises(OpenCodeError, match="hotkey"):
        frames.edit_code(study, "why", 91, hotkey="s")


def test_renumber_merge_retire_delete_repoint_assignments(study):
    frames.add_code(study, "why", "Safety", 1, hotkey="s")
    frames.add_code(study, "why", "Unsafe", 2)
    frames.add_code(study, "why", "Cost", 3)
    v = ids(study)
    A.assign(study, v[0], 1, "ash")
    A.assign(study, v[0], 2, "ash")
    A.assign(study, v[1], 2, "ash")
    A.assign(study, v[1], 2, "bryn", source="machine", confidence=0.9)
    frames.renumber_code(study, "why", 1, 10, actor="lead")
    assert [c.number for c in A.codes_of(study, v[0], "ash")] == [2, 10]
    frames.merge_codes(study, "why", 2, 10, actor="lead")  # v0 already holds 10: no duplicate
    assert [c.number for c in A.codes_of(study, v[0], "ash")] == [10]
    assert [c.number for c in A.codes_of(study, v[1], "ash")] == [10]
    assert A.codes_of(study, v[1], "bryn")[0].source == "machine"
    with pytest.raises(OpenCodeError, match="no code 2"):
        frames.get_code(study, "why", 2)
    assert history.undo(study, "lead") == "merge"
    assert [c.number for c in A.codes_of(study, v[0], "ash")] == [2, 10]
    frames.retire_code(study, "why", 3)
    with pytest.raises(OpenCodeError, match="retired"):
        frames.merge_codes(study, "why", 2, 3)
    with pytest.raises(OpenCodeError, match="is retired"):
        A.assign(study, v[2], 3, "ash")
    with pytest.raises(OpenCodeError, match="used by 3 assignments; name a code to merge"):
        frames.delete_code(study, "why", 2)
    frames.delete_code(study, "why", 2, merge_into=10)
    assert A.code_counts(study, "why", "ash") == {10: 2}


def test_demo_frame_round_trip_csv_json(study, tmp_path):
    counts = frame_io.import_frame(study, "why", demo_dir() / "frame-why.csv")
    assert counts["added"] == 20
    frame = frames.load_frame(study, "why")
    assert frame.by_number()[7].net == 93 and frame.by_number()[93].net == 92
    assert sorted(c.number for c in frame.leaves_under(92)) == [7, 8, 9, 10, 11]
    for name in ("f.csv", "f.json"):
        frame_io.export_frame(study, "why", tmp_path / name)
    original = frame_io.frame_records(study, "why")
    # importing the exports into a second question of a fresh copy gives the same records
    for name in ("f.csv", "f.json"):
        source = tmp_path / "s.csv"
        target = tmp_path / f"copy-{name}.study"
        import_survey(target, source, ImportOptions(id_column="rid", questions=["why"]))
        with Study.open(target) as copy:
            frame_io.import_frame(copy, "why", tmp_path / name)
            again = frame_io.frame_records(copy, "why")
        drop = (lambda r: {k: v for k, v in r.items() if k != "examples"}) if name.endswith("csv") else (lambda r: r)
        assert [drop(r) for r in again] == [drop(r) for r in original]
    assert json.loads((tmp_path / "f.json").read_text())["codes"][0]["number"] == 1


@pytest.mark.parametrize("body, message", [
    ("number,label\n1,A\n1,B\n", "row 3: code number 1 already appears at .*row 2"),
    ("number,label,net\n1,A,5\n", "net 5 does not exist"),
    ("number,label,kind,net\n1,A,net,2\n2,B,net,1\n", "cycle or nest deeper"),
    ("number,label,hotkey\n1,A,a\n2,B,a\n", "hotkey 'a' is already used by code 1"),
    ("number,label,kind\n1,A,theme\n", "row 2: code 1: kind 'theme'"),
    ("number,label\nx,A\n", "row 2, column number: 'x' is not a code number"),
    ("label\nA\n", "missing column"),
])
def test_frame_import_errors_name_the_row(study, tmp_path, body, message):
    path = tmp_path / "bad.csv"
    path.write_text(body)
    with pytest.raises(OpenCodeError, match=message):
        frame_io.import_frame(study, "why", path)
    assert study._db.execute("SELECT COUNT(*) FROM codes").fetchone()[0] == 0


def test_codebook_counts_nets_once_and_masks_examples(study, tmp_path):
    frames.add_code(study, "why", "Concerns", 90, kind="net")
    frames.add_code(study, "why", "Safety", 1, net=90, description="feeling unsafe")
    frames.add_code(study, "why", "Phone", 2, net=90)
    v = ids(study)
    A.assign(study, v[0], 1, "ash")
    A.assign(study, v[0], 2, "ash")
    A.assign(study, v[3], 2, "ash")
    entries = {e.code.number: e for e in codebook.codebook_entries(study, "why")}
    assert entries[90].count == 2 and entries[1].count == 1 and entries[2].count == 2
    assert any("[phone]" in t for t in entries[2].examples)
    assert not any("07700" in t for e in entries.values() for t in e.examples)
    md = codebook.write_codebook(study, "why", tmp_path / "cb.md").read_text()
    assert "feeling unsafe" in md and "Concerns (net): 2" in md
    page = codebook.write_codebook(study, "why", tmp_path / "cb.html").read_text()
    assert page.startswith("<!DOCTYPE html>") and "n = 2" in page
    with pytest.raises(OpenCodeError, match=r"\.md or \.html"):
        codebook.write_codebook(study, "why", tmp_path / "cb.txt")
