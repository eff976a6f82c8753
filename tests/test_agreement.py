"""Multi-code agreement: building the matrix, per-code and set-valued statistics against references, bootstrap, errors."""

import krippendorff
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from nltk.metrics.agreement import AnnotationTask
from nltk.metrics.distance import jaccard_distance as nltk_jaccard
from nltk.metrics.distance import masi_distance as nltk_masi
from sklearn.metrics import cohen_kappa_score, confusion_matrix
from statsmodels.stats.inter_rater import fleiss_kappa as sm_fleiss_kappa

from opencode.analysis.agreement.core import CodingMatrix, measure_agreement
from opencode.analysis.agreement.bootstrap import bootstrap_totals, resample_weights
from opencode.analysis.agreement.codes import CodeFeatures
from opencode.analysis.agreement.disagreement import confused_pairs, disputed_units, pair_tables
from opencode.analysis.agreement.sets import jaccard_distance, masi_distance, set_alpha
from opencode.analysis.agreement.stats import gwet_ac1_table, pabak_table
from opencode.errors import OpenCodeError


def random_matrix(seed, units=30, coders=3, codes=4, missing=0.15, nonempty=False, agree=0.75):
    """Random multi-code data with some agreement: coders copy a hidden set with probability `agree`."""
    rng = np.random.default_rng(seed)
    truth = rng.random((units, codes)) < rng.uniform(0.15, 0.5, codes)
    noise = rng.random((units, coders, codes)) < 0.2
    present = np.where(rng.random((units, coders, codes)) < agree, truth[:, None, :], noise)
    coded = rng.random((units, coders)) >= missing
    coded[:2, :] = True
    present[0, :, 0] = True
    if nonempty:
        present[:, :, 0] |= ~present.any(axis=2)
    present &= coded[:, :, None]
    names = tuple(f"coder{r}" for r in range(coders - 1)) + ("machine",)
    return CodingMatrix(tuple(range(units)), names, tuple(range(1, codes + 1)), present, coded)


def per_code(matrix):
    """Point estimates of every per-code statistic through the vectorised feature path."""
    features = CodeFeatures.from_matrix(matrix)
    return features.statistics(features.totals())


# --- building from assignments -------------------------------------------------------------------------------

def test_from_assignments_builds_cells_and_missing():
    rows = [(10, "ash", 1), (10, "ash", 2), (10, "bryn", 2), (11, "bryn", 3), (12, "ash", 1)]
    coded = {"ash": [10, 11, 12], "bryn": [10, 11]}
    m = CodingMatrix.from_assignments(rows, coded, codes=[1, 2, 3, 4])
    assert m.units == (10, 11, 12) and m.coders == ("ash", "bryn") and m.codes == (1, 2, 3, 4)
    assert m.present[0, 0].tolist() == [True, True, False, False]
    assert m.present[1, 0].tolist() == [False] * 4 and m.coded[1, 0]  # coded with no code
    assert not m.coded[2, 1]  # bryn did not code 12: missing, not "no code"
    assert m.pairable.tolist() == [True, True, False]


def test_assignment_implies_coded_and_other_coders_ignored():
    rows = [(1, "ash", 1), (1, "bryn", 1), (2, "bryn", 2), (2, "cy", 2), (3, "ash", 2)]
    m = CodingMatrix.from_assignments(rows, coders=["bryn", "ash"])
    assert m.coders == ("bryn", "ash") and m.units == (1, 2, 3)
    assert m.coded.tolist() == [[True, True], [True, False], [False, True]]


def test_errors_name_the_problem():
    with pytest.raises(OpenCodeError, match="at least 2 coders; got 1 .ash."):
        CodingMatrix.from_assignments([(1, "ash", 1)])
    with pytest.raises(OpenCodeError, match="coder 'bryn' has coded no verbatims"):
        CodingMatrix.from_assignments([(1, "ash", 1)], coders=["ash", "bryn"])
    with pytest.raises(OpenCodeError, match="coder 'bryn' gave no codes at all on the 2 verbatims"):
        CodingMatrix.from_assignments([(1, "ash", 1)], {"bryn": [1, 2]})
    with pytest.raises(OpenCodeError, match="code 9 to verbatim 1, but the code frame has no code 9"):
        CodingMatrix.from_assignments([(1, "ash", 9), (1, "bryn", 1)], codes=[1, 2])
    with pytest.raises(OpenCodeError, match="no verbatim was coded by two or more"):
        measure_agreement(CodingMatrix.from_assignments([(1, "ash", 1), (2, "bryn", 1)]), n_resamples=0)
    with pytest.raises(OpenCodeError, match="confidence"):
        measure_agreement(random_matrix(0), confidence=95)


def test_single_coded_units_are_counted_not_fatal():
    rows = [(1, "ash", 1), (1, "bryn", 1), (2, "ash", 2), (2, "bryn", 1), (3, "ash", 1), (4, "bryn", 2)]
    result = measure_agreement(CodingMatrix.from_assignments(rows), n_resamples=0)
    assert (result.n_units, result.n_pairable, result.n_single) == (4, 2, 2)
    assert any("2 verbatims coded by one coder only" in w for w in result.warnings)
    assert any("small base" in w for w in result.warnings)


def test_code_nobody_used_is_undefined_in_words():
    rows = [(u, c, 1 + (u % 2)) for u in range(8) for c in ("ash", "bryn")] + [(0, "ash", 2)]
    result = measure_agreement(CodingMatrix.from_assignments(rows, codes=[1, 2, 3]), n_resamples=50)
    unused = result.per_code[2].statistics
    assert unused["cohen_kappa"].value is None
    assert unused["cohen_kappa"].words == "undefined: no coder used this code"
    assert unused["krippendorff_alpha"].words == "undefined: no coder used this code"
    assert result.per_code[0].statistics["cohen_kappa"].value is not None


# --- per-code statistics against reference libraries -------------------------------------------------------

@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), units=st.integers(4, 40))
def test_per_code_cohen_matches_sklearn(seed, units):
    # Reference: sklearn.metrics.cohen_kappa_score on each code's present/absent labels (both coders' units).
    m = random_matrix(seed, units=units, coders=2)
    ours = per_code(m)["cohen_kappa"]
    both = m.coded.all(axis=1)
    for c in range(len(m.codes)):
        a, b = m.present[both, 0, c], m.present[both, 1, c]
        if len(set(a) | set(b)) < 2:
            assert np.isnan(ours[c])
        else:
            assert ours[c] == pytest.approx(cohen_kappa_score(a, b, labels=[False, True]), abs=1e-9)


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # statsmodels divides 0/0 on degenerate tables
@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), coders=st.integers(3, 5), units=st.integers(4, 40))
def test_per_code_fleiss_matches_statsmodels(seed, coders, units):
    # Reference: statsmodels.stats.inter_rater.fleiss_kappa on complete data (every coder codes every unit).
    m = random_matrix(seed, units=units, coders=coders, missing=0.0)
    ours = per_code(m)["fleiss_kappa"]
    for c in range(len(m.codes)):
        k = m.present[:, :, c].sum(axis=1)
        ref = sm_fleiss_kappa(np.column_stack([k, coders - k]), method="fleiss")
        assert ours[c] == pytest.approx(ref, abs=1e-6) or (np.isnan(ours[c]) and np.isnan(ref))


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # krippendorff divides 0/0 on degenerate data
@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), coders=st.integers(2, 4), units=st.integers(4, 40))
def test_per_code_krippendorff_matches_package_with_missing(seed, coders, units):
    # Reference: krippendorff.alpha(reliability_data=..., level_of_measurement="nominal"), NaN = not coded.
    m = random_matrix(seed, units=units, coders=coders, missing=0.3)
    ours = per_code(m)["krippendorff_alpha"]
    for c in range(len(m.codes)):
        data = np.where(m.coded, m.present[:, :, c], np.nan).T.astype(float)
        pairable = m.pairable
        if np.unique(data[:, pairable][~np.isnan(data[:, pairable])]).size < 2:
            assert np.isnan(ours[c])
            continue
        ref = krippendorff.alpha(reliability_data=data, level_of_measurement="nominal")
        assert ours[c] == pytest.approx(ref, abs=1e-6)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_two_coder_forms_agree(seed):
    # Gwet (2008) two-rater AC1 and Byrt et al. (1993) PABAK from the pair's 2x2 tables equal the per-code path.
    m = random_matrix(seed, coders=2, missing=0.0)
    stats = per_code(m)
    tables = pair_tables(m).tables[0]
    assert stats["gwet_ac1"] == pytest.approx(gwet_ac1_table(tables), abs=1e-6, nan_ok=True)
    assert stats["pabak"] == pytest.approx(pabak_table(tables)[0], abs=1e-6)
    assert stats["percent"] == pytest.approx(np.trace(tables, axis1=1, axis2=2) / tables.sum(axis=(1, 2)))


# --- set-valued alpha -------------------------------------------------------------------------------------

def test_masi_published_examples():
    # Passonneau (2006) via CHECKS.md; reference nltk.metrics.distance.masi_distance / jaccard_distance.
    assert masi_distance({1, 2}, {1, 2, 3, 4}) == pytest.approx(0.6667, abs=1e-4)
    assert masi_distance(set("abc"), set("cd")) == pytest.approx(0.9167, abs=1e-4)
    assert jaccard_distance({1, 2}, {1, 2, 3, 4}) == pytest.approx(0.5)
    for a, b in [({1, 2}, {1, 2, 3, 4}), (set("abc"), set("cd")), ({1}, {2}), ({1, 2}, {2, 1}), ({5}, {5, 6})]:
        assert masi_distance(a, b) == pytest.approx(nltk_masi(a, b))
        assert jaccard_distance(a, b) == pytest.approx(nltk_jaccard(a, b))
    assert masi_distance(set(), set()) == 0.0 and masi_distance(set(), {1}) == 1.0


def _annotation_task(m, distance):
    data = [(coder, u, frozenset(np.asarray(m.codes)[m.present[u, r]].tolist()))
            for u in range(len(m.units)) for r, coder in enumerate(m.coders) if m.coded[u, r]]
    return AnnotationTask(data=data, distance=distance)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), coders=st.integers(2, 4), units=st.integers(4, 30))
def test_set_alpha_matches_nltk(seed, coders, units):
    # Reference: nltk.metrics.agreement.AnnotationTask(distance=masi_distance / jaccard_distance).alpha().
    m = random_matrix(seed, units=units, coders=coders, nonempty=True, missing=0.2)
    given_sets = {m.present[u, r].tobytes() for u in np.flatnonzero(m.pairable) for r in range(coders) if m.coded[u, r]}
    if len(given_sets) == 1:
        # One distinct set on every compared verbatim: nltk returns 1 by convention, we call it undefined (0/0).
        assert np.isnan(set_alpha(m, "masi")) and np.isnan(set_alpha(m, "jaccard"))
        return
    for kind, distance in (("masi", nltk_masi), ("jaccard", nltk_jaccard)):
        ref = _annotation_task(m, distance)
        try:
            expected = ref.alpha()
        except ZeroDivisionError:
            assume(False)
        assert set_alpha(m, kind) == pytest.approx(expected, abs=1e-9)


def test_set_alpha_with_empty_sets_matches_nltk_with_empty_rule():
    # Empty set = coded with no code; nltk's distances divide by zero on two empty sets, so the reference
    # wraps them with the rule we use (two empty sets are identical).
    m = random_matrix(3, units=40, coders=3, codes=3)
    assert any(not m.present[u, r].any() for u in range(40) for r in range(3) if m.coded[u, r])
    for kind, distance in (("masi", nltk_masi), ("jaccard", nltk_jaccard)):
        wrapped = lambda a, b, f=distance: 0.0 if not a and not b else f(a, b)  # noqa: E731
        assert set_alpha(m, kind) == pytest.approx(_annotation_task(m, wrapped).alpha(), abs=1e-9)


def test_unknown_distance_is_refused():
    with pytest.raises(OpenCodeError, match="unknown set distance 'cosine'"):
        set_alpha(random_matrix(0), "cosine")


# --- bootstrap ---------------------------------------------------------------------------------------------

def test_resample_weights_are_resamples_with_replacement():
    blocks = list(resample_weights(50, 130, random_state=4))
    w = np.vstack(blocks)
    assert w.shape == (130, 50)
    assert (w.sum(axis=1) == 50).all()
    # Each unit's multiplicity is Binomial(50, 1/50): mean 1, variance 0.98 (textbook binomial moments).
    assert w.mean() == pytest.approx(1.0, abs=0.05)
    assert w.var() == pytest.approx(0.98, rel=0.15)


def test_bootstrap_reproducible_and_contains_point():
    m = random_matrix(11, units=300, coders=3, codes=4)
    first = measure_agreement(m, n_resamples=300, random_state=7)
    again = measure_agreement(m, n_resamples=300, random_state=7)
    other = measure_agreement(m, n_resamples=300, random_state=8)
    for a, b, c in zip(first.per_code, again.per_code, other.per_code):
        for name, est in a.statistics.items():
            assert (est.low, est.high) == (b.statistics[name].low, b.statistics[name].high)
            if est.value is not None and name != "percent":
                assert est.low <= est.value <= est.high
        assert a.statistics["fleiss_kappa"].low != c.statistics["fleiss_kappa"].low
    for name, est in first.frame.items():
        assert est.low <= est.value <= est.high and est == again.frame[name]


def test_bootstrap_spread_matches_binomial_standard_error():
    # Percent agreement of two coders is a binomial proportion: bootstrap SE ~ sqrt(p (1 - p) / n)
    # (standard binomial theory; Efron & Tibshirani 1993 for the bootstrap of a mean).
    m = random_matrix(5, units=400, coders=2, codes=1, missing=0.0, agree=0.6)
    features = CodeFeatures.from_matrix(m)
    samples = features.statistics(bootstrap_totals([features.columns], 2000, 1)[0])["percent"][:, 0]
    p = per_code(m)["percent"][0]
    assert samples.std() == pytest.approx(np.sqrt(p * (1 - p) / 400), rel=0.1)


def test_set_interval_skipped_above_limit_with_words():
    m = random_matrix(2, units=80, coders=3, codes=6)
    result = measure_agreement(m, n_resamples=50, max_sets_for_interval=3)
    masi = result.frame["alpha_masi"]
    assert masi.value is not None and masi.low is None
    assert "distinct code sets (interval limit 3)" in masi.words


# --- where coders differ -----------------------------------------------------------------------------------

def test_pair_tables_match_sklearn_confusion_matrix():
    # Reference: sklearn.metrics.confusion_matrix on each code's labels over the units both coders coded.
    m = random_matrix(9, units=50, coders=3)
    pt = pair_tables(m)
    for p, (i, j) in enumerate([(0, 1), (0, 2), (1, 2)]):
        both = m.coded[:, i] & m.coded[:, j]
        for c in range(len(m.codes)):
            ref = confusion_matrix(m.present[both, i, c], m.present[both, j, c], labels=[True, False])
            assert pt.tables[p, c].tolist() == ref.tolist()


def test_disputed_units_and_confused_pairs_on_hand_example():
    rows = [(1, "ash", 1), (1, "machine", 2),                      # 1 vs 2 swapped
            (2, "ash", 1), (2, "ash", 3), (2, "machine", 2), (2, "machine", 4),  # 4 disputed codes
            (3, "ash", 1), (3, "machine", 1),                      # agreement
            (4, "ash", 3), (4, "machine", 3), (4, "machine", 1)]   # superset: no swap
    m = CodingMatrix.from_assignments(rows, codes=[1, 2, 3, 4])
    units = disputed_units(m, top=2)
    assert [(u.unit, u.n_disputed_codes) for u in units] == [(2, 4), (1, 2)]
    assert units[0].sets == {"ash": (1, 3), "machine": (2, 4)}
    pairs = {(p.code_a, p.code_b): p.count for p in confused_pairs(m, top=10)}
    # unit 1: (1,2); unit 2: ash {1,3} x machine {2,4} -> (1,2), (1,4), (2,3), (3,4).
    assert pairs == {(1, 2): 2, (1, 4): 1, (2, 3): 1, (3, 4): 1}


def test_machine_coder_is_just_another_coder():
    m = random_matrix(1, units=60, coders=2)
    assert m.coders == ("coder0", "machine")
    result = measure_agreement(m, n_resamples=20)
    assert result.pair_tables.pairs == (("coder0", "machine"),)
    assert "cohen_kappa" in result.statistic_names
