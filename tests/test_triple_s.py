"""Triple-S XML 2.0 export checked against the structure of the published standard.

Source: Triple-S XML Survey Interchange Standard, version 2.0 (December 2006, triple-s.org), as summarised
in CHECKS.md "Interchange standard": root <sss version="2.0"> with <date>, <time>, <origin>, <survey>
(<name>, <title>, <record ident format>); <variable ident type use> with <name>, <label>,
<position start finish/>, optional <spread subfields width/>, <values> of <value code> or <range from to/>.
Multiple variables: bitstring by default (one character per code 1..highest, "1" = chosen) or spread
subfields each holding one code. Fixed format: 1-based inclusive character columns; csv format: field
numbers (the csv reading of <position> and the <size> element are from memory).
"""

import csv
import datetime as dt
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from opencode.errors import OpenCodeError
from opencode.export.dataset import ClosedVariable, CodedDataset, CodedQuestion, FrameCode, build_table
from opencode.export.triple_s import read_triple_s, write_triple_s
from helpers import WHY_CODES, small_dataset

WHEN = dt.datetime(2024, 5, 1, 9, 30, 0)


def _tiny() -> CodedDataset:
    """Three respondents, codes 1..4 plus net 6 (code 5 unused), hand-checkable layouts."""
    frame = [FrameCode(1, "Safety", net=6), FrameCode(2, "Cost", net=6), FrameCode(3, "Hours"),
             FrameCode(4, "Other"), FrameCode(6, "Concerns", is_net=True)]
    q = CodedQuestion("why", "Why do you say that?", frame, [{1, 3}, set(), {2, 4}], ["ok", "", "=bad\nidea"])
    support = ClosedVariable("support", [5, None, 1], "Support", {1: "oppose", 5: "support"})
    return CodedDataset([7, 8, 10], [q], [support], title="Wrenfield")


def test_metadata_elements_and_attributes_follow_the_standard(tmp_path):
    meta, data = write_triple_s(_tiny(), tmp_path / "tiny.sss", timestamp=WHEN)
    assert data == tmp_path / "tiny.asc"
    text = meta.read_text(encoding="utf-8")
    assert text.startswith('<?xml version="1.0" encoding="UTF-8"?>')
    root = ET.fromstring(text)
    assert root.tag == "sss" and root.attrib == {"version": "2.0"}
    assert [child.tag for child in root] == ["date", "time", "origin", "survey"]
    assert (root.findtext("date"), root.findtext("time"), root.findtext("origin")) == ("2024-05-01", "09:30:00", "oecode")
    survey = root.find("survey")
    assert [child.tag for child in survey] == ["name", "title", "record"]
    record = survey.find("record")
    assert record.attrib == {"ident": "A", "format": "fixed"}
    variables = record.findall("variable")
    assert [v.attrib for v in variables] == [
        {"ident": "1", "type": "quantity", "use": "serial"},
        {"ident": "2", "type": "single"},
        {"ident": "3", "type": "multiple"},
    ]
    for v in variables:
        assert [c.tag for c in v][:3] == ["name", "label", "position"]
        assert set(v.find("position").attrib) == {"start", "finish"}
    serial, single, multiple = variables
    assert serial.find("values/range").attrib == {"from": "7", "to": "10"}
    assert {v.get("code"): v.text for v in single.findall("values/value")} == {"1": "oppose", "5": "support"}
    assert [(v.get("code"), v.text) for v in multiple.findall("values/value")] == [
        ("1", "Safety"), ("2", "Cost"), ("3", "Hours"), ("4", "Other"), ("6", "Concerns")]
    assert multiple.find("spread") is None


def test_fixed_positions_are_contiguous_and_match_the_data_columns(tmp_path):
    meta, data = write_triple_s(_tiny(), tmp_path / "tiny.sss", verbatims="raw", timestamp=WHEN)
    positions = [(int(p.get("start")), int(p.get("finish"))) for p in ET.parse(meta).getroot().iter("position")]
    assert positions[0][0] == 1
    for (_, finish), (start, _) in zip(positions, positions[1:]):
        assert start == finish + 1
    lines = data.read_bytes().decode("utf-8").split("\r\n")
    assert lines[-1] == "" and len(lines) == 4
    # Hand layout: id width 2 (right-justified), support 1 column, bitstring of 6 (codes 1..6), text 10
    # (the formula guard's quote counts: every writer guards its text cells, fixed width too).
    assert positions == [(1, 2), (3, 3), (4, 9), (10, 19)]
    assert lines[:3] == [
        " 75101001ok        ",  # codes {1,3} + net 6 -> bits for codes 1..6 = 101001
        " 8 000000          ",  # no answer: blank single, all-zero bitstring
        "101010101'=bad idea",  # {2,4} + net 6 -> 010101; the line break in the text became a space
    ]
    assert all(len(line) == positions[-1][1] for line in lines[:3])


def test_spread_layout_subfields_hold_codes(tmp_path):
    meta, data = write_triple_s(_tiny(), tmp_path / "tiny.sss", multiple="spread", timestamp=WHEN)
    multiple = ET.parse(meta).getroot().find("survey/record/variable[@type='multiple']")
    assert multiple.find("spread").attrib == {"subfields": "3", "width": "1"}
    assert [c.tag for c in multiple] == ["name", "label", "position", "spread", "values"]
    assert multiple.find("position").attrib == {"start": "4", "finish": "6"}
    assert data.read_text(encoding="utf-8").splitlines() == [" 75136", " 8 000", "101246"]


def test_spread_width_follows_highest_code(tmp_path):
    frame = [FrameCode(3, "a"), FrameCode(12, "b")]
    ds = CodedDataset(["r1", "r2"], [CodedQuestion("q", "Q", frame, [{12, 3}, {12}])])
    meta, data = write_triple_s(ds, tmp_path / "w.sss", multiple="spread", timestamp=WHEN)
    root = ET.parse(meta).getroot()
    serial = root.find("survey/record/variable[@use='serial']")
    assert serial.get("type") == "character"
    assert root.find(".//spread").attrib == {"subfields": "2", "width": "2"}
    assert data.read_text(encoding="utf-8").splitlines() == ["r10312", "r21200"]


def test_csv_format_positions_are_field_numbers(tmp_path):
    meta, data = write_triple_s(_tiny(), tmp_path / "tiny.sss", data_format="csv", multiple="spread",
                                verbatims="raw", timestamp=WHEN)
    assert data == tmp_path / "tiny.csv"
    root = ET.parse(meta).getroot()
    assert root.find("survey/record").get("format") == "csv"
    positions = [(int(p.get("start")), int(p.get("finish"))) for p in root.iter("position")]
    assert positions == [(1, 1), (2, 2), (3, 5), (6, 6)]
    text_var = root.find("survey/record/variable[@type='character']")
    assert text_var.findtext("size") == "10"  # the longest text with its guard quote
    with open(data, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    # Respondent 8 is in the base with no code: zeros in the spread subfields (blank would mean missing).
    assert rows == [["7", "5", "1", "3", "6", "ok"], ["8", "", "0", "0", "0", ""], ["10", "1", "2", "4", "6", "'=bad idea"]]


@pytest.mark.parametrize("data_format", ["fixed", "csv"])
@pytest.mark.parametrize("multiple", ["bitstring", "spread"])
def test_reader_gets_back_what_was_written(tmp_path, data_format, multiple):
    ds = small_dataset()
    meta, _ = write_triple_s(ds, tmp_path / "w.sss", data_format=data_format, multiple=multiple,
                             verbatims="masked", timestamp=WHEN)
    back = read_triple_s(meta)
    assert back.header["version"] == "2.0" and back.header["format"] == data_format
    assert back.header["title"] == "Wrenfield library hours"
    d = back.data
    assert d["respondent_id"].tolist() == [101, 102, 103, 104, 105, 106]
    assert d["support"].tolist()[:4] == [1, 5, 9, 4] and d["support"].isna().tolist()[4]
    np.testing.assert_allclose(d["weight"], [1.2, 0.8, 1.0, 1.5, 0.75, 0.9])
    nets = {20: {1, 2}, 21: {3, 4}}
    expected = [frozenset(c | {n for n, m in nets.items() if c & m}) for c in WHY_CODES]
    assert d["why"].tolist() == expected
    # The multiple variable agrees with the dichotomy layout of the other exports.
    table = build_table(ds).data
    for code in (1, 2, 3, 4, 5, 20, 21):
        assert [int(code in s) for s in d["why"]] == table[f"why_c{code}"].tolist()
    masked_first = build_table(ds, verbatims="masked").data["why_text"][0]
    assert d["why_text"][0] == masked_first
    by_name = {v.name: v for v in back.variables}
    assert by_name["support"].values[9] == "refused"
    assert by_name["why"].values[20] == "Safety"


def test_bad_options_and_bad_files(tmp_path):
    with pytest.raises(OpenCodeError, match="format must be one of fixed, csv"):
        write_triple_s(_tiny(), tmp_path / "a.sss", data_format="tsv")
    with pytest.raises(OpenCodeError, match="multiple must be one of bitstring, spread"):
        write_triple_s(_tiny(), tmp_path / "a.sss", multiple="columns")
    with pytest.raises(OpenCodeError, match="needs its own name"):
        write_triple_s(_tiny(), tmp_path / "a.asc")
    (tmp_path / "bad.sss").write_text("<survey/>", encoding="utf-8")
    with pytest.raises(OpenCodeError, match="expected <sss>"):
        read_triple_s(tmp_path / "bad.sss")
    (tmp_path / "broken.sss").write_text("<sss", encoding="utf-8")
    with pytest.raises(OpenCodeError, match="cannot read Triple-S metadata"):
        read_triple_s(tmp_path / "broken.sss")
    meta, data = write_triple_s(_tiny(), tmp_path / "ok.sss", timestamp=WHEN)
    data.unlink()
    with pytest.raises(OpenCodeError, match="cannot read Triple-S data"):
        read_triple_s(meta)


@settings(max_examples=30, deadline=None)
@given(
    frame_codes=st.sets(st.integers(1, 40), min_size=1, max_size=8),
    data=st.data(),
    data_format=st.sampled_from(["fixed", "csv"]),
    multiple=st.sampled_from(["bitstring", "spread"]),
)
def test_any_coding_survives_the_round_trip(frame_codes, data, data_format, multiple):
    codes = sorted(frame_codes)
    frame = [FrameCode(c, f"code {c}") for c in codes]
    rows = data.draw(st.lists(st.sets(st.sampled_from(codes)), min_size=1, max_size=12))
    ds = CodedDataset(list(range(1, len(rows) + 1)), [CodedQuestion("q", "Q", frame, rows)])
    with tempfile.TemporaryDirectory() as folder:
        meta, _ = write_triple_s(ds, Path(folder) / "p.sss", data_format=data_format, multiple=multiple, timestamp=WHEN)
        back = read_triple_s(meta)
    assert back.data["q"].tolist() == [frozenset(r) for r in rows]
