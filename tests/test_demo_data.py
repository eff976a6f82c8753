"""The invented Wrenfield demo survey: reproducible, shipped files in step with the generator, usable content."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from scipy.stats import chi2_contingency
from sklearn.metrics import cohen_kappa_score

from opencode.demo import generate as gen
from opencode.demo.generate import FILES, generate_demo
from opencode.errors import OpenCodeError
from opencode.resources import demo_dir

CLOSED = ["support", "age_band", "neighbourhood", "visits_month", "children", "weight"]
FRAME_COLUMNS = ["number", "label", "kind", "net", "hotkey", "description", "include", "exclude", "special"]


def read_data(folder: Path) -> pd.DataFrame:
    """The main CSV with text kept as text (blank verbatims stay '') and blank numbers as NaN."""
    return pd.read_csv(folder / "wrenfield.csv", dtype={"resp_id": str, "why": str, "improve": str},
                       keep_default_na=False, na_values={c: [""] for c in CLOSED})


def read_frame(folder: Path, question: str) -> pd.DataFrame:
    """A code frame file with every cell as text."""
    return pd.read_csv(folder / f"frame-{question}.csv", dtype=str, keep_default_na=False)


@pytest.fixture(scope="module")
def shipped() -> Path:
    return demo_dir()


@pytest.fixture(scope="module")
def fresh(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("fresh")
    generate_demo(out, seed=2026)
    return out


@pytest.fixture(scope="module")
def data(shipped) -> pd.DataFrame:
    return read_data(shipped)


# --- reproducibility -------------------------------------------------------------------------------------

def test_same_seed_gives_byte_identical_files(tmp_path):
    first = generate_demo(tmp_path / "a", seed=7, n_respondents=400)
    second = generate_demo(tmp_path / "b", seed=7, n_respondents=400)
    assert list(first) == list(FILES)
    for name in FILES:
        assert first[name].read_bytes() == second[name].read_bytes(), name


def test_different_seed_gives_different_data(tmp_path):
    a = generate_demo(tmp_path / "a", seed=7, n_respondents=400)
    b = generate_demo(tmp_path / "b", seed=8, n_respondents=400)
    assert a["wrenfield.csv"].read_bytes() != b["wrenfield.csv"].read_bytes()
    assert a["frame-why.csv"].read_bytes() == b["frame-why.csv"].read_bytes()


@pytest.mark.parametrize("name", [f for f in FILES if f.endswith(".csv")])
def test_shipped_csv_files_equal_a_fresh_generation(shipped, fresh, name):
    assert (shipped / name).read_bytes() == (fresh / name).read_bytes(), (
        f"demo/{name} has drifted from the generator: run python -m opencode.demo.generate")


def test_shipped_sav_holds_the_same_content_as_a_fresh_generation(shipped, fresh):
    # compared by content, not bytes, so a newer pyreadstat writing a different header does not fail this
    old, old_meta = pyreadstat.read_sav(shipped / "wrenfield.sav", user_missing=True)
    new, new_meta = pyreadstat.read_sav(fresh / "wrenfield.sav", user_missing=True)
    pd.testing.assert_frame_equal(old, new)
    assert old_meta.variable_value_labels == new_meta.variable_value_labels
    assert old_meta.missing_ranges == new_meta.missing_ranges
    assert old_meta.column_names_to_labels == new_meta.column_names_to_labels


def test_shipped_files_are_all_present(shipped):
    for name in FILES:
        assert (shipped / name).is_file(), name


# --- closed-ended data, labels and the .sav ----------------------------------------------------------------

def test_columns_ids_and_value_ranges(data):
    assert list(data.columns) == list(gen.COLUMNS)
    assert len(data) == 2400
    assert data["resp_id"].is_unique
    assert data["resp_id"].str.fullmatch(r"WR\d{5}").all()
    assert not data["resp_id"].is_monotonic_increasing  # shuffled order
    assert set(data["support"].unique()) == {1, 2, 3, 4, 5, 9}
    visits = data["visits_month"]
    assert ((visits.between(0, 30)) | (visits == 99)).all()
    assert set(data["age_band"].dropna().unique()) == set(range(1, 7))
    assert set(data["neighbourhood"].unique()) == set(range(1, 6))
    assert set(data["children"].dropna().unique()) == {1, 2}
    assert data["age_band"].isna().any() and data["children"].isna().any()  # some system-missing cells


def test_weights_look_like_raking_weights(data):
    w = data["weight"]
    assert w.mean() == pytest.approx(1.0, abs=0.01)
    assert w.min() >= 0.399 and w.max() <= 2.501
    assert w.nunique() > 500
    weighted = w.groupby(data["neighbourhood"]).sum() / w.sum()
    np.testing.assert_allclose(weighted.to_numpy(), gen.NBHD_POPULATION, atol=0.02)


def test_support_split_is_realistic(data):
    s = data["support"]
    assert 0.40 <= s.isin([4, 5]).mean() <= 0.52
    assert 0.28 <= s.isin([1, 2]).mean() <= 0.40
    assert 0.01 <= (s == 9).mean() <= 0.06


def test_support_relates_to_age_children_neighbourhood_and_safety(data):
    supports = data["support"].isin([4, 5])
    by_age = supports.groupby(data["age_band"]).mean()
    assert by_age[1] - by_age[6] > 0.25
    by_children = supports.groupby(data["children"]).mean()
    assert by_children[1] - by_children[2] > 0.1
    table = pd.crosstab(data["neighbourhood"], supports)
    assert chi2_contingency(table)[1] < 1e-6  # scipy chi-square test of independence
    safety = data["why"].str.lower().str.contains(r"\bsafe|\bunsafe|\bsafety")
    opposed = data["support"].isin([1, 2])
    assert safety[opposed].mean() > 2 * safety[data["support"].isin([4, 5])].mean()


def test_csv_and_sav_agree(shipped, data):
    sav, meta = pyreadstat.read_sav(shipped / "wrenfield.sav", user_missing=True)
    assert list(sav.columns) == list(data.columns)
    assert sav["resp_id"].tolist() == data["resp_id"].tolist()
    for col in ("why", "improve"):
        assert sav[col].tolist() == data[col].tolist(), col
    for col in CLOSED:
        np.testing.assert_allclose(sav[col].to_numpy(float), data[col].to_numpy(float), equal_nan=True, err_msg=col)
    assert meta.missing_ranges == {"support": [{"lo": 9.0, "hi": 9.0}], "visits_month": [{"lo": 99.0, "hi": 99.0}]}
    plain, _ = pyreadstat.read_sav(shipped / "wrenfield.sav")
    assert plain["support"].isna().sum() == (data["support"] == 9).sum()


def test_labels_file_matches_the_sav_metadata(shipped):
    labels = pd.read_csv(shipped / "wrenfield-labels.csv", dtype=str, keep_default_na=False)
    assert list(labels.columns) == ["variable", "label", "code", "value_label", "missing"]
    _, meta = pyreadstat.read_sav(shipped / "wrenfield.sav", metadataonly=True)
    var_rows = labels[labels["code"] == ""]
    assert dict(zip(var_rows["variable"], var_rows["label"])) == meta.column_names_to_labels
    values = labels[labels["code"] != ""]
    from_csv = {v: {float(c): t for c, t in zip(g["code"], g["value_label"])} for v, g in values.groupby("variable")}
    assert from_csv == meta.variable_value_labels
    missing = values[values["missing"] == "1"]
    assert sorted(zip(missing["variable"], missing["code"])) == [("support", "9"), ("visits_month", "99")]
    assert set(values["missing"]) == {"0", "1"}


# --- code frames ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("question", ["why", "improve"])
def test_frames_are_valid(shipped, question):
    frame = read_frame(shipped, question)
    assert list(frame.columns) == FRAME_COLUMNS
    assert frame["number"].str.fullmatch(r"\d+").all()
    assert frame["number"].is_unique
    assert set(frame["kind"]) == {"code", "net"}
    codes, nets = frame[frame["kind"] == "code"], frame[frame["kind"] == "net"]
    assert 10 <= len(codes) <= 20 and 2 <= len(nets) <= 4
    hotkeys = codes["hotkey"]
    assert hotkeys.str.fullmatch(r"[a-z0-9]").all() and hotkeys.is_unique
    assert (nets["hotkey"] == "").all()
    net_parent = dict(zip(nets["number"], nets["net"]))
    for parent in frame["net"][frame["net"] != ""]:
        assert parent in net_parent, f"{question}: net {parent} is not a net"
    for number, parent in net_parent.items():
        assert parent == "" or net_parent[parent] == "", f"{question}: net {number} nests more than one level"
        assert (frame["net"] == number).any(), f"{question}: net {number} is empty"
    assert sorted(codes["special"][codes["special"] != ""]) == ["dontknow", "nonanswer", "other"]
    assert (nets["special"] == "").all()
    assert (frame["label"] != "").all()


# --- double coding -------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def double(shipped) -> pd.DataFrame:
    return pd.read_csv(shipped / "double-coded.csv", dtype=str, keep_default_na=False)


def test_double_coded_file_references_real_codes_and_both_coders(shipped, double, data):
    assert list(double.columns) == ["respondent_id", "question", "coder", "codes"]
    assert set(double["coder"]) == {"ash", "bryn"} and set(double["question"]) == {"why", "improve"}
    assert double["respondent_id"].nunique() == 300
    assert set(double["respondent_id"]) <= set(data["resp_id"])
    assert not double.duplicated(["respondent_id", "question", "coder"]).any()
    assert len(double) == 300 * 2 * 2
    for question in ("why", "improve"):
        frame = read_frame(shipped, question)
        valid = set(frame["number"][frame["kind"] == "code"])
        used = {c for codes in double["codes"][double["question"] == question] for c in codes.split(";")}
        assert used <= valid, used - valid


def test_non_answers_get_the_nonanswer_code(shipped, double, data):
    texts = data.set_index("resp_id")
    checked = 0
    for question, blanks in (("why", gen.NONANSWERS_WHY), ("improve", gen.NONANSWERS_IMPROVE)):
        frame = read_frame(shipped, question)
        nonanswer = frame["number"][frame["special"] == "nonanswer"].item()
        rows = double[double["question"] == question]
        verbatims = texts.loc[rows["respondent_id"], question].to_numpy()
        hit = np.isin(verbatims, list(blanks))
        assert (rows["codes"][hit] == nonanswer).all()
        checked += hit.sum()
    assert checked >= 10


@pytest.mark.parametrize("question", ["why", "improve"])
def test_coders_disagree_realistically(double, question):
    # Cohen's kappa per code from scikit-learn's cohen_kappa_score (the reference implementation)
    rows = double[double["question"] == question].pivot(index="respondent_id", columns="coder", values="codes")
    ash = rows["ash"].str.split(";").apply(set)
    bryn = rows["bryn"].str.split(";").apply(set)
    kappas = []
    for code in set().union(*ash, *bryn):
        a, b = ash.apply(lambda s: code in s), bryn.apply(lambda s: code in s)
        if a.sum() + b.sum() >= 20:
            kappas.append(cohen_kappa_score(a, b))
    kappas = np.array(kappas)
    assert len(kappas) >= 8
    assert 0.6 <= np.median(kappas) <= 0.9
    assert np.mean((kappas >= 0.5) & (kappas <= 0.95)) >= 0.7
    assert (ash != bryn).mean() > 0.05  # they do disagree
    # ash misses secondary codes more often, so codes fewer
    assert ash.apply(len).sum() < bryn.apply(len).sum()


# --- realistic mess in the verbatims ---------------------------------------------------------------------

def test_non_answers_and_blanks(data):
    for question, blanks in (("why", gen.NONANSWERS_WHY), ("improve", gen.NONANSWERS_IMPROVE)):
        answers = data[question]
        assert (answers == "").sum() >= 10
        assert 0.03 <= answers.isin(blanks + gen.DONTKNOWS).mean() <= 0.12


def test_exact_duplicates_of_longer_answers(data):
    for question in ("why", "improve"):
        answers = data[question][data[question].str.split().str.len() >= 8]
        assert answers.duplicated().sum() >= 3


def test_other_language_answers(data):
    foreign = {s for s, _, _ in gen.FOREIGN_WHY + gen.FOREIGN_IMPROVE}
    both = pd.concat([data["why"], data["improve"]])
    share = both.isin(foreign).mean()
    assert 0.004 <= share <= 0.02
    assert both.str.contains("[ąęłńśźżćóÄäÖöÜüßñ]").sum() >= 10


def test_typos_shouting_emoji_and_odd_lengths(data):
    both = pd.concat([data["why"], data["improve"]])
    assert both.str.contains(r"\blibary\b").sum() >= 5
    misspelt = [w for w in gen.MISSPELL.values() if w not in ("there", "their", "quite", "evenings")]
    assert both.str.contains("|".join(rf"\b{w}\b" for w in misspelt)).sum() >= 50
    letters = both.str.replace(r"[^A-Za-z]", "", regex=True)
    assert ((letters.str.len() >= 6) & (letters == letters.str.upper())).sum() >= 10
    assert (letters.str.len() >= 6).sum() and (both == both.str.lower()).mean() > 0.15
    assert both.str.contains("[\U0001F300-\U0001FAFF]").sum() >= 10
    assert both.str.contains(r"!!|\?\?|\.\.\.").sum() >= 50
    words = both.str.split().str.len()
    assert (words >= 90).sum() >= 5 and words.max() <= 200
    assert (words == 1).sum() >= 100
    assert 6 <= words[words > 0].median() <= 20
    assert both.str.contains("\n").sum() >= 1
    phrases = ("opening hours", "self service", "study space", "not safe", "wouldn't feel safe")
    for phrase in phrases:
        assert both.str.lower().str.contains(phrase, regex=False).sum() >= 3, phrase


def test_contact_details_for_masking(data):
    both = pd.concat([data["why"], data["improve"]])
    phones = both.str.contains(r"07700 900\d{3}")
    emails = both.str.contains(r"[\w.]+@example\.(?:org|net|com)")
    assert phones.sum() >= 3 and emails.sum() >= 3
    assert (phones | emails).mean() < 0.02


# --- inputs and the command line -----------------------------------------------------------------------------

def test_bad_output_folder_is_a_clear_error(tmp_path):
    target = tmp_path / "occupied"
    target.write_text("not a folder")
    with pytest.raises(OpenCodeError, match="occupied"):
        generate_demo(target)


@pytest.mark.parametrize("seed", [-1, 1.5, "2026", True])
def test_bad_seed_is_rejected(tmp_path, seed):
    with pytest.raises(OpenCodeError, match="seed"):
        generate_demo(tmp_path, seed=seed)


@pytest.mark.parametrize("n", [0, 399, 2.5, None])
def test_bad_respondent_count_is_rejected(tmp_path, n):
    with pytest.raises(OpenCodeError, match="respondents"):
        generate_demo(tmp_path, n_respondents=n)


def test_module_runs_from_the_command_line(tmp_path):
    out = tmp_path / "new" / "demo"
    done = subprocess.run([sys.executable, "-m", "opencode.demo.generate", "--out", str(out), "--respondents", "400"],
                          capture_output=True, text=True, timeout=60, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    assert sorted(p.name for p in out.iterdir()) == sorted(FILES)
    assert len(read_data(out)) == 400
    printed = [Path(line) for line in done.stdout.splitlines()]
    assert [p.name for p in printed] == list(FILES)


def test_command_line_error_is_one_line_and_non_zero(tmp_path, capsys):
    target = tmp_path / "file.txt"
    target.write_text("x")
    assert gen.main(["--out", str(target)]) == 1
    err = capsys.readouterr().err
    assert "file.txt" in err and "Traceback" not in err and len(err.strip().splitlines()) == 1


def test_verbatim_text_is_clean_utf8(shipped):
    raw = (shipped / "wrenfield.csv").read_bytes()
    text = raw.decode("utf-8")
    assert not text.startswith("\ufeff") and "\r" not in text
    assert re.search(r"[\x00-\x08\x0b\x0c\x0e-\x1f]", text) is None
