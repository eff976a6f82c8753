"""`oecode tables` and `oecode export` on a real study file: printed tables, written files read back, bad input."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from openpyxl import load_workbook

from opencode.analysis.tables import coded_data
from opencode.cli import main
from opencode.coding.assignments import mark_done
from opencode.export.triple_s import read_triple_s
from opencode.study import survey_data
from opencode.study.store import Study
from helpers import MACHINE_SUGGESTIONS, RULE_SUGGESTIONS, add_numeric, build_fixture_study, copy_study


@pytest.fixture(scope="module")
def study_path(tmp_path_factory) -> Path:
    return build_fixture_study(tmp_path_factory.mktemp("cli"))


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_tables_prints_frequencies_with_bases_and_warnings(study_path, capsys):
    code, out, err = run(capsys, "tables", study_path, "--question", "why")
    assert code == 0
    assert "code frequencies" in out and "Base: answered" in out and "Effective base (Kish)" in out
    assert "% of mentions" in out and "Non-answers" in out
    assert "Concerns about the proposal" in out  # a net
    assert "answered verbatims not yet coded by 'final'" in err


def test_tables_unweighted_has_no_weighted_column(study_path, capsys):
    code, out, _ = run(capsys, "tables", study_path, "--question", "why", "--unweighted")
    assert code == 0 and "Weighted" not in out and "Effective base" not in out


def test_tables_with_suggestions_says_so(study_path, capsys):
    code, out, err = run(capsys, "tables", study_path, "--question", "why", "--with-suggestions")
    n = MACHINE_SUGGESTIONS + RULE_SUGGESTIONS
    assert code == 0
    assert f"includes {n} machine/rule suggestions not yet reviewed by a person" in " ".join(out.split())  # title wraps
    assert f"includes {n} machine/rule suggestions" in err


def test_banner_table_with_letters_and_files(study_path, tmp_path, capsys):
    xlsx = tmp_path / "why.xlsx"
    code, out, err = run(capsys, "tables", study_path, "--question", "why", "--banner", "age_band", "children",
                         "--lower", "90", "--out", xlsx)
    assert code == 0
    assert "column % by banner" in out and "Row test q" in out and "lower case at 90%" in out
    assert "bases under 30 flagged" in err  # the young age bands of the coded subset are small
    sheets = load_workbook(xlsx, read_only=True).sheetnames
    assert len(sheets) == 2 and any("codes" in s for s in sheets) and any("banner" in s for s in sheets)

    csv_path, html_path = tmp_path / "why.csv", tmp_path / "why.html"
    assert run(capsys, "tables", study_path, "--question", "why", "--banner", "age_band", "--out", csv_path)[0] == 0
    first = csv_path.read_text(encoding="utf-8").splitlines()[0]
    assert "column % by banner" in first
    assert run(capsys, "tables", study_path, "--question", "why", "--out", html_path)[0] == 0
    page = html_path.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and 'class="oc-table"' in page


def _expected_indicators(study_path: Path, question: str, coder: str) -> tuple[list, pd.DataFrame]:
    """0/1 per code from the study's coding, nets as any-of-members (frame parents, one nested level);
    missing (NaN) for every respondent outside the base of `oecode tables`."""
    with Study.open(study_path) as study:
        coding = coded_data.load_coding(study, question, coder)
    dense = pd.DataFrame(coding.indicators.toarray().astype(float), columns=[c.number for c in coding.codes])
    parent = {c.number: c.net for c in coding.codes + coding.nets}
    for net in coding.nets:
        inside = [c.number for c in coding.codes if parent[c.number] == net.number or parent.get(parent[c.number]) == net.number]
        dense[net.number] = dense[inside].max(axis=1)
    dense.loc[~coding.answered, :] = np.nan
    return coded_data.export_ids(coding.respondent_ids), dense


def test_sav_export_reads_back_with_the_studys_codes(study_path, tmp_path, capsys):
    out_path = tmp_path / "coded.sav"
    code, out, err = run(capsys, "export", study_path, "--format", "sav", "--out", out_path, "--question", "why",
                         "--coder", "bryn", "--closed", "age_band")
    assert code == 0 and f"wrote {out_path}" in out
    # Outside check: pyreadstat reads the file back.
    data, meta = pyreadstat.read_sav(out_path)
    keys, expected = _expected_indicators(study_path, "why", "bryn")
    assert data["resp_id"].tolist() == keys
    for number in expected.columns:
        np.testing.assert_array_equal(data[f"why_c{number}"].to_numpy(), expected[number].to_numpy(), err_msg=str(number))
    assert "age_band" in data.columns and "why_status" in data.columns
    assert meta.variable_value_labels["why_status"][3.0] == "not yet coded"
    assert (tmp_path / "coded-frame.csv").exists()


def test_triple_s_export_reads_back(study_path, tmp_path, capsys):
    metadata = tmp_path / "coded.sss"
    code, out, _ = run(capsys, "export", study_path, "--format", "sss", "--out", metadata, "--question", "why",
                       "--coder", "ash", "--sss-data", "csv", "--sss-multiple", "spread")
    assert code == 0 and "coded.csv" in out
    survey = read_triple_s(metadata)
    keys, expected = _expected_indicators(study_path, "why", "ash")
    variable = next(v for v in survey.variables if v.type == "multiple")
    assert variable.spread is not None
    chosen = survey.data[variable.name]
    assert survey.data[next(v.name for v in survey.variables if v.use == "serial")].tolist() == keys
    numbers = expected.columns.to_numpy()
    held = expected.to_numpy() > 0
    assert held.any()
    in_base = expected.notna().all(axis=1).to_numpy()
    assert in_base.any() and not in_base.all()
    for row in range(len(keys)):  # the multiple variable holds codes and nets; blank (None) outside the base
        if in_base[row]:
            assert set(chosen.iloc[row]) == set(numbers[held[row]].tolist())
        else:
            assert chosen.iloc[row] is None


def test_other_formats_and_verbatim_reminders(study_path, tmp_path, capsys):
    dta = tmp_path / "coded.dta"
    assert run(capsys, "export", study_path, "--out", dta, "--question", "why", "--layout", "mentions")[0] == 0
    frame = pd.read_stata(dta, convert_categoricals=False)  # outside check: pandas reads Stata
    assert "why_m1" in frame.columns
    xlsx = tmp_path / "coded.xlsx"
    code, _, err = run(capsys, "export", study_path, "--format", "xlsx", "--out", xlsx, "--question", "why",
                       "--verbatims", "masked")
    assert code == 0 and "masked" in err
    assert load_workbook(xlsx, read_only=True).sheetnames == ["data", "frame", "variables"]
    csv_path = tmp_path / "coded.csv"
    frame_before = (tmp_path / "coded-frame.csv").read_bytes()  # written beside coded.dta above
    code, _, err = run(capsys, "export", study_path, "--format", "csv", "--out", csv_path, "--question", "why",
                       "--verbatims", "raw", "--all-closed")
    assert code == 1 and "coded-frame.csv (written beside" in err and "--overwrite" in err
    assert not csv_path.exists() and (tmp_path / "coded-frame.csv").read_bytes() == frame_before
    code, _, err = run(capsys, "export", study_path, "--format", "csv", "--out", csv_path, "--question", "why",
                       "--verbatims", "raw", "--all-closed", "--overwrite")
    assert code == 0 and "data-protection rules come first" in err
    written = pd.read_csv(csv_path, dtype=str, keep_default_na=False)
    assert "@" in "".join(written["why_text"])  # raw keeps the e-mail addresses...
    masked_csv = tmp_path / "masked.csv"
    assert run(capsys, "export", study_path, "--format", "csv", "--out", masked_csv, "--question", "why",
               "--verbatims", "masked")[0] == 0
    masked = pd.read_csv(masked_csv, dtype=str, keep_default_na=False)
    assert "@" not in "".join(masked["why_text"]) and "[email]" in "".join(masked["why_text"])  # ...masked does not


def test_export_bad_paths_leave_no_file(study_path, tmp_path, capsys):
    missing = tmp_path / "no-such-folder" / "coded.sav"
    code, out, err = run(capsys, "export", study_path, "--format", "sav", "--out", missing, "--question", "why")
    assert code == 1 and "does not exist" in err and not missing.parent.exists()
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    code, _, err = run(capsys, "export", study_path, "--format", "csv", "--out", blocker / "coded.csv")
    assert code == 1 and "is not a folder" in err


def test_export_without_write_permission(study_path, locked_folder, capsys):
    # Runs under root too: the locked_folder fixture simulates the kernel's refusal there (see conftest.py).
    code, _, err = run(capsys, "export", study_path, "--format", "csv", "--out", locked_folder / "coded.csv")
    assert code == 1 and "no permission" in err and not list(locked_folder.iterdir())


def test_unknown_format_and_unknown_coder(study_path, tmp_path, capsys):
    code, _, err = run(capsys, "export", study_path, "--format", "pdf", "--out", tmp_path / "x.pdf")
    assert code == 1 and "unknown format 'pdf'" in err and "sav" in err and not (tmp_path / "x.pdf").exists()
    code, _, err = run(capsys, "tables", study_path, "--question", "why", "--coder", "nobody")
    assert code == 1 and "coder 'nobody'" in err and "--coder" in err and "ash (" in err
    code, _, err = run(capsys, "tables", study_path, "--question", "why", "--out", tmp_path / "t.pdf")
    assert code == 1 and ".xlsx" in err


def test_tables_bad_banner_weight_and_zero_base(study_path, tmp_path, capsys):
    path = copy_study(study_path, tmp_path / "copy")
    with Study.open(path) as study:
        n = survey_data.respondent_count(study)
        add_numeric(study, "w_empty", np.full(n, np.nan))
        negative = np.ones(n)
        negative[3] = -1.0
        add_numeric(study, "w_negative", negative)
        add_numeric(study, "one_group", np.ones(n), kind="single", labels={1.0: "everyone"})
        texts = survey_data.verbatims(study, "why")
        mark_done(study, int(texts.loc[texts["nonanswer"], "verbatim_id"].iloc[0]), "zed")
    code, _, err = run(capsys, "tables", path, "--question", "why", "--banner", "one_group")
    assert code == 1 and "fewer than two categories" in err
    code, _, err = run(capsys, "tables", path, "--question", "why", "--weight", "w_empty")
    assert code == 1 and "is empty" in err
    code, _, err = run(capsys, "tables", path, "--question", "why", "--weight", "w_negative")
    assert code == 1 and "negative" in err
    code, out, err = run(capsys, "tables", path, "--question", "why", "--coder", "zed", "--unweighted", "--banner",
                         "age_band")
    assert code == 0 and "base 0 is under 30" in err
    net_row = next(line for line in out.splitlines() if line.startswith("90 "))
    assert set(net_row.split()[5:]) == {"-"}  # no percentage and no test on an empty base


def test_export_with_suggestions_says_how_many(study_path, tmp_path, capsys):
    out_path = tmp_path / "coded.csv"
    code, _, err = run(capsys, "export", study_path, "--format", "csv", "--out", out_path, "--question", "why",
                       "--with-suggestions")
    said = f"includes {MACHINE_SUGGESTIONS + RULE_SUGGESTIONS} machine/rule suggestions not yet reviewed by a person"
    assert code == 0 and said in err
    frame = pd.read_csv(tmp_path / "coded-frame.csv")
    assert frame["question_label"].str.contains(said, regex=False).all()
