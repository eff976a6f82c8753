"""Reliability samples stored in real study files, blindness, and agreement measured from the study.

The demo study (Wrenfield) gets its starter frame and the double-coded file imported through the coding
library; expected values are computed from the CSV files directly (pandas) and, for kappa, with scikit-learn.
The double-coded demo study (`demo_copy`) and the codes read from its CSV (`csv_sets`) are conftest.py fixtures.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import cohen_kappa_score

from opencode.analysis.agreement.core import CodingMatrix, measure_agreement
from opencode.analysis.agreement.report import format_agreement_text
from opencode.coding import assignments as coding
from opencode.coding import frames
from opencode.analysis.agreement.study import question_agreement
from opencode.coding import reliability as rel
from opencode.demo_job import build_demo_study
from opencode.errors import OpenCodeError
from opencode.resources import demo_dir
from opencode.study import survey_data
from opencode.study.store import Study

NAN = re.compile(r"\bnan\b", re.IGNORECASE)


def frame_codes() -> list[int]:
    """Numbers of the codes (not nets) in demo/frame-why.csv."""
    frame = pd.read_csv(demo_dir() / "frame-why.csv")
    return sorted(frame.loc[frame["kind"] == "code", "number"].astype(int))


# -- drawing ------------------------------------------------------------------------------------------------------
def test_draw_is_stored_reproducible_and_leaves_out_nonanswers(demo_copy, tmp_path):
    other = tmp_path / "other.study"
    build_demo_study(other)
    with Study.open(demo_copy) as a, Study.open(other) as b:
        first = rel.draw_sample(a, "why", "rel1", n=150, random_state=7)
        again = rel.draw_sample(b, "why", "rel1", n=150, random_state=7)
        changed = rel.draw_sample(a, "why", "rel2", n=150, random_state=8)
        assert first.verbatim_ids == again.verbatim_ids and len(first.verbatim_ids) == 150
        assert set(first.verbatim_ids) != set(changed.verbatim_ids)
        assert rel.get_sample(a, "why", "rel1").verbatim_ids == first.verbatim_ids
        pool = survey_data.verbatims(a, "why")
        nonanswers = set(pool.loc[pool["nonanswer"], "verbatim_id"])
        assert nonanswers and not nonanswers & set(first.verbatim_ids)
        assert first.params["population"] == len(pool) - len(nonanswers)
        audited = a._db.execute("SELECT actor, entity FROM audit WHERE action = 'draw-sample'").fetchall()
        assert audited == [("oecode", "sample"), ("oecode", "sample")]
        whole = rel.draw_sample(a, "why", "all", percent=100, include_nonanswers=True)
        assert len(whole.verbatim_ids) == len(pool)


def test_stratified_draw_keeps_the_proportions(demo_copy):
    # Proportional allocation (Cochran, Sampling Techniques, 3rd ed., 1977, sec. 5.5): n_h = n N_h / N,
    # rounded by largest remainders, so every stratum is within one verbatim of its exact share.
    with Study.open(demo_copy) as study:
        drawn = rel.draw_sample(study, "why", "strat", n=240, strata="neighbourhood", random_state=3)
        pool = survey_data.verbatims(study, "why", include_nonanswers=False)
        keys = survey_data.respondent_keys(study)
        values = survey_data.analysis_values(study, "neighbourhood")
        label = survey_data.get_variable(study, "neighbourhood").display
        by_key = {k: (label(v) if v == v else "(missing)") for k, v in zip(keys, values)}
    stratum = pool["respondent"].map(by_key)
    population = stratum.value_counts()
    sampled = stratum[pool["verbatim_id"].isin(drawn.verbatim_ids)].value_counts().reindex(population.index,
                                                                                            fill_value=0)
    exact = 240 * population / population.sum()
    assert sampled.sum() == 240
    assert (np.abs(sampled - exact) < 1).all()
    table = {name: (pop, got) for name, pop, got in drawn.params["allocation"]}
    assert {k: v[1] for k, v in table.items()} == sampled.to_dict()
    assert "stratified by neighbourhood" in rel.format_sample(drawn)


@pytest.mark.parametrize("kwargs, message", [
    ({"n": 10, "strata": "why"}, "not a closed-ended"),
    ({"n": 10, "strata": "weight"}, "distinct values"),
    ({"n": 10, "strata": "nosuch"}, "no variable named 'nosuch'"),
    ({"n": 99999}, "only 2211 are available"),
    ({}, "either a number of verbatims or a percentage"),
])
def test_bad_draws_are_clear_errors(demo_copy, kwargs, message):
    with Study.open(demo_copy) as study:
        with pytest.raises(OpenCodeError, match=message):
            rel.draw_sample(study, "why", "bad", **kwargs)
        assert study._db.execute("SELECT COUNT(*) FROM samples").fetchone()[0] == 0


def test_duplicate_and_unknown_names(demo_copy):
    with Study.open(demo_copy) as study:
        rel.draw_sample(study, "why", "rel1", n=20)
        with pytest.raises(OpenCodeError, match="already has a reliability sample named 'rel1'"):
            rel.draw_sample(study, "why", "rel1", n=20)
        with pytest.raises(OpenCodeError, match=r"no reliability sample named 'rel9' \(samples: rel1\)"):
            rel.sample_status(study, "why", "rel9")
        with pytest.raises(OpenCodeError, match="no open question named 'wy'"):
            rel.draw_sample(study, "wy", "x", n=5)
        with pytest.raises(OpenCodeError, match="give the sample a name"):
            rel.draw_sample(study, "why", "  ", n=5)


# -- assigning, status, blindness --------------------------------------------------------------------------------------
def test_assign_and_status_count_finished_verbatims(demo_copy, csv_sets):
    sets = csv_sets
    with Study.open(demo_copy) as study:
        sample = rel.draw_sample(study, "why", "rel1", percent=20, random_state=2)
        with pytest.raises(OpenCodeError, match="two or more coders"):
            rel.assign_sample(study, "why", "rel1", ["ash"])
        with pytest.raises(OpenCodeError, match="'final' is reserved"):
            rel.assign_sample(study, "why", "rel1", "ash,final")
        assigned = rel.assign_sample(study, "why", "rel1", "ash,bryn", actor="lead")
        assert assigned.coders == ("ash", "bryn")
        assert rel.assign_sample(study, "why", "rel1", ["cy"]).coders == ("ash", "bryn", "cy")
        respondents = survey_data.verbatims(study, "why").set_index("verbatim_id")["respondent"]
        in_sample = {respondents[v] for v in sample.verbatim_ids}
        # cy finishes two sample verbatims: one with a code, one marked done without any code
        first, second = sample.verbatim_ids[:2]
        coding.assign(study, first, 7, "cy")
        coding.mark_done(study, second, "cy")
        status = rel.sample_status(study, "why", "rel1")
        audited = study._db.execute("SELECT actor, payload FROM audit WHERE action = 'assign-sample'").fetchall()
    done = {p.coder: p.finished for p in status.progress}
    assert done == {"ash": len(in_sample & set(sets["ash"])), "bryn": len(in_sample & set(sets["bryn"])), "cy": 2}
    assert all(p.finished + p.remaining == len(sample.verbatim_ids) for p in status.progress)
    both = {respondents[v] for v in (first, second)} & set(sets["ash"]) & set(sets["bryn"])
    assert status.finished_by_all == len(both)
    assert [a for a, _ in audited] == ["lead", "oecode"] and '"cy"' in audited[1][1]
    text = rel.format_sample_status(status)
    assert "cy" in text and f"of {len(sample.verbatim_ids)}" in text


def test_is_blind_only_for_assigned_coders_on_sample_items(demo_copy):
    with Study.open(demo_copy) as study:
        sample = rel.draw_sample(study, "why", "rel1", n=30, random_state=1)
        inside = sample.verbatim_ids[0]
        outside = next(v for v in survey_data.verbatims(study, "why")["verbatim_id"] if v not in sample.verbatim_ids)
        assert not rel.is_blind(study, "why", "ash", inside)  # not assigned yet
        rel.assign_sample(study, "why", "rel1", "ash,bryn")
        assert rel.is_blind(study, "why", "ash", inside) and rel.is_blind(study, "why", "bryn", inside)
        assert not rel.is_blind(study, "why", "ash", outside)
        assert not rel.is_blind(study, "why", "final", inside)
        assert not rel.is_blind(study, "improve", "ash", inside)
        assert rel.blind_verbatim_ids(study, "why", "ash").tolist() == sorted(sample.verbatim_ids)
        assert rel.blind_verbatim_ids(study, "why", "cy").size == 0


# -- agreement from the study ------------------------------------------------------------------------------------------
def test_agreement_from_the_study_matches_the_csv_and_sklearn(demo_copy, csv_sets):
    sets = csv_sets
    codes = frame_codes()
    with Study.open(demo_copy) as study:
        result = question_agreement(study, "why", ["ash", "bryn"], n_resamples=100, random_state=4)
        labels = rel.code_labels(study, "why")
    # the library on the same assignments read straight from the file
    rows = [(rid, coder, c) for coder, by in sets.items() for rid, cs in by.items() for c in cs]
    direct = measure_agreement(CodingMatrix.from_assignments(rows, {c: list(b) for c, b in sets.items()},
                                                              coders=["ash", "bryn"], codes=codes),
                               code_labels=labels, n_resamples=100, random_state=4,
                               special_codes={98: "dontknow", 99: "nonanswer"})  # the frame's specials (frame-why.csv)
    assert result.special_codes == {98: "dontknow", 99: "nonanswer"}
    assert result.n_pairable == direct.n_pairable == 300
    assert {k: e.value for k, e in result.frame.items()} == {k: e.value for k, e in direct.frame.items()}
    assert [(c.code, c.label, c.statistics["cohen_kappa"].value) for c in result.per_code] == \
           [(c.code, c.label, c.statistics["cohen_kappa"].value) for c in direct.per_code]
    # outside check: scikit-learn's Cohen's kappa on each code's present / absent ratings
    respondents = sorted(sets["ash"])
    for entry in result.per_code:
        a = [entry.code in sets["ash"][r] for r in respondents]
        b = [entry.code in sets["bryn"][r] for r in respondents]
        expected = cohen_kappa_score(a, b) if len(set(a) | set(b)) > 1 else None
        if expected is None:
            assert entry.statistics["cohen_kappa"].value is None
        else:
            assert entry.statistics["cohen_kappa"].value == pytest.approx(expected, abs=1e-12)
    assert result.per_code[0].label == "Not safe without staff"


def test_agreement_on_a_sample_uses_only_its_verbatims(demo_copy, csv_sets):
    sets = csv_sets
    with Study.open(demo_copy) as study:
        sample = rel.draw_sample(study, "why", "rel1", percent=30, random_state=5)
        respondents = survey_data.verbatims(study, "why").set_index("verbatim_id")["respondent"]
        result = question_agreement(study, "why", "ash,bryn", sample="rel1", n_resamples=0)
    in_sample = {respondents[v] for v in sample.verbatim_ids} & set(sets["ash"])
    assert result.n_pairable == len(in_sample) > 0
    assert result.units_per_coder == {"ash": len(in_sample), "bryn": len(in_sample)}


def test_the_machine_coder_joins_as_one_more_coder(demo_copy, csv_sets):
    sets = csv_sets
    with Study.open(demo_copy) as study:
        ids = survey_data.verbatims(study, "why").set_index("respondent")["verbatim_id"]
        chosen = sorted(sets["ash"])[:40]
        for i, rid in enumerate(chosen):  # machine suggestions held by final, as the autocoder writes them
            coding.assign(study, int(ids[rid]), 7 if i % 2 else 1, "final", source="machine", confidence=0.9)
        result = question_agreement(study, "why", "ash,machine", n_resamples=0)
        assert "3" not in rel.coder_sets(study, "why", "ash,machine")["machine"]
    assert result.coders == ("ash", "machine") and result.n_pairable == 40
    machine = {rid: {7 if i % 2 else 1} for i, rid in enumerate(chosen)}
    code7 = next(c for c in result.per_code if c.code == 7)
    expected = cohen_kappa_score([7 in sets["ash"][r] for r in chosen], [7 in machine[r] for r in chosen])
    assert code7.statistics["cohen_kappa"].value == pytest.approx(expected, abs=1e-12)


def test_single_coded_verbatims_are_counted_and_reported(demo_copy):
    with Study.open(demo_copy) as study:
        uncoded = coding.uncoded_ids(study, "why", "ash", limit=3)
        for v in uncoded:
            coding.assign(study, v, 2, "ash")
        result = question_agreement(study, "why", ["ash", "bryn"], n_resamples=0)
    assert result.n_single == 3 and result.n_pairable == 300 and result.units_per_coder["ash"] == 303
    text = format_agreement_text(result)
    assert "300 by two or more coders (compared); 3 by one coder only" in text
    assert "3 verbatims coded by one coder only are left out" in text


def test_a_code_nobody_used_is_undefined_in_words(demo_copy):
    with Study.open(demo_copy) as study:
        frames.add_code(study, "why", "Parking near the branch", number=40)
        result = question_agreement(study, "why", ["ash", "bryn"], n_resamples=50)
    unused = next(c for c in result.per_code if c.code == 40)
    assert unused.statistics["cohen_kappa"].value is None
    assert unused.statistics["cohen_kappa"].words == "undefined: no coder used this code"
    text = format_agreement_text(result)
    assert "Parking near the branch" in text and "undefined" in text and not NAN.search(text)


@pytest.mark.parametrize("coders, sample, message", [
    ("ash,cy", None, r"coder 'cy' has coded no verbatims of question 'why' \(coders with hand codes here: .*ash"),
    ("ash", None, "name at least 2 coders"),
    ("ash,ash", None, "coder 'ash' is named twice"),
    ("ash,bryn", "nosuch", "no reliability sample named 'nosuch'"),
    ("ash,machine", None, "the machine coder .* has coded no verbatims"),
])
def test_agreement_bad_inputs_are_clear_errors(demo_copy, coders, sample, message):
    with Study.open(demo_copy) as study:
        with pytest.raises(OpenCodeError, match=message):
            question_agreement(study, "why", coders, sample=sample, n_resamples=0)


def test_a_coder_who_coded_none_of_the_sample_is_named(demo_copy):
    with Study.open(demo_copy) as study:
        rel.draw_sample(study, "why", "rel1", n=5, random_state=0)
        sample = rel.get_sample(study, "why", "rel1")
        coding.mark_done(study, sample.verbatim_ids[0], "cy")
        with pytest.raises(OpenCodeError, match="coder 'dee' has coded no verbatims of question 'why' in reliability "
                                                "sample 'rel1'"):
            question_agreement(study, "why", "cy,dee", sample="rel1", n_resamples=0)
        with pytest.raises(OpenCodeError, match="no open question named 'nope'"):
            question_agreement(study, "nope", "ash,bryn")
