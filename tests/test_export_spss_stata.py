"""SPSS .sav and Stata .dta exports read back with pyreadstat (and pandas for .dta): labels and values intact.

Reference readers: pyreadstat.read_sav / read_dta and pandas.read_stata (CHECKS.md, "Export and safety").
"""

import numpy as np
import pandas as pd
import pyreadstat
import pytest

from opencode.errors import OpenCodeError
from opencode.export.dataset import ClosedVariable, CodedDataset, CodedQuestion, FrameCode, build_table
from opencode.export.spss_stata import write_dta, write_sav
from helpers import small_dataset


def _assert_same_values(read: pd.DataFrame, expected: pd.DataFrame) -> None:
    assert list(read.columns) == list(expected.columns)
    for name in expected.columns:
        want = expected[name]
        got = read[name]
        if want.dtype.kind in "iuf":
            np.testing.assert_array_equal(got.to_numpy(dtype=float), want.to_numpy(dtype=float), err_msg=name)
        else:
            assert got.fillna("").tolist() == want.fillna("").tolist(), name


@pytest.mark.parametrize("ids", [None, ["w-01", "w-02", "w-03", "w-04", "w-05", "w-06"]])
def test_sav_round_trip_keeps_values_and_labels(tmp_path, ids):
    ds = small_dataset(ids=ids)
    expected = build_table(ds, mention_columns=True, verbatims="masked")
    paths = write_sav(ds, tmp_path / "wrenfield.sav", mention_columns=True, verbatims="masked")
    assert paths == [tmp_path / "wrenfield.sav", tmp_path / "wrenfield-frame.csv"]
    data, meta = pyreadstat.read_sav(paths[0], user_missing=True)
    _assert_same_values(data, expected.data)
    assert meta.column_names_to_labels == expected.column_labels
    assert meta.variable_value_labels == expected.value_labels
    assert meta.missing_ranges == {"support": [{"lo": 9.0, "hi": 9.0}]}
    assert meta.file_label == "Wrenfield library hours"
    assert meta.variable_measure["why_c20"] == "nominal"
    # Without user_missing the refused code reads as missing: the SPSS missing flag is in effect.
    plain, _ = pyreadstat.read_sav(paths[0])
    assert np.isnan(plain["support"][2])
    frame = pd.read_csv(paths[1])
    assert frame.loc[frame.code == 20, "variable"].tolist() == ["why_c20"]


def test_dta_round_trip_with_pyreadstat_and_pandas(tmp_path):
    ds = small_dataset()
    expected = build_table(ds, mention_columns=True, verbatims="raw")
    path = write_dta(ds, tmp_path / "wrenfield.dta", mention_columns=True, verbatims="raw")[0]
    data, meta = pyreadstat.read_dta(path)
    _assert_same_values(data, expected.data)
    assert meta.column_names_to_labels == expected.column_labels
    assert meta.variable_value_labels == expected.value_labels
    assert data["support"][2] == 9  # Stata keeps the refused code as a labelled value

    plain = pd.read_stata(path, convert_categoricals=False)
    _assert_same_values(plain, expected.data)
    with pd.read_stata(path, iterator=True) as reader:
        assert reader.variable_labels() == expected.column_labels
        label_sets = list(reader.value_labels().values())
    assert len(label_sets) == len(expected.value_labels)
    for mapping in expected.value_labels.values():
        assert mapping in label_sets
    categorical = pd.read_stata(path)
    assert categorical["why_c1"].tolist() == ["coded", "not coded", "not coded", "not coded", "not coded", "coded"]
    assert categorical["why_m1"].tolist()[:2] == ["Staff make it feel safe", "Longer hours suit shift workers"]


def test_long_labels_fit_each_format(tmp_path):
    long_label = "é" * 300
    frame = [FrameCode(1, long_label)]
    ds = CodedDataset([1, 2], [CodedQuestion("q", long_label, frame, [{1}, set()])], title="t")
    write_sav(ds, tmp_path / "a.sav", mention_columns=True)
    _, meta = pyreadstat.read_sav(tmp_path / "a.sav")
    assert len(meta.column_names_to_labels["q_c1"].encode("utf-8")) <= 256
    assert meta.variable_value_labels["q_m1"][1] == "é" * 60  # 120 bytes
    write_dta(ds, tmp_path / "a.dta")
    _, meta = pyreadstat.read_dta(tmp_path / "a.dta")
    assert meta.column_names_to_labels["q_c1"] == ("q: " + long_label)[:80]


def test_missing_codes_beyond_three_become_a_range_or_an_error(tmp_path):
    run = ClosedVariable("x", [1, 2, 96], missing_codes=[96, 97, 98, 99])
    write_sav(CodedDataset([1, 2, 3], [], [run]), tmp_path / "ok.sav", frame_csv=False)
    _, meta = pyreadstat.read_sav(tmp_path / "ok.sav", user_missing=True)
    assert meta.missing_ranges == {"x": [{"lo": 96.0, "hi": 99.0}]}
    assert not (tmp_path / "ok-frame.csv").exists()
    scattered = ClosedVariable("x", [1, 2, 3], missing_codes=[7, 8, 9, 99])
    with pytest.raises(OpenCodeError, match="'x': SPSS allows at most 3"):
        write_sav(CodedDataset([1, 2, 3], [], [scattered]), tmp_path / "bad.sav")
    assert not (tmp_path / "bad.sav").exists()


def test_stata_rejects_fractional_value_labels(tmp_path):
    half = ClosedVariable("score", [0.5, 1.0], value_labels={0.5: "half", 1: "one"})
    with pytest.raises(OpenCodeError, match="'score': Stata value labels need whole numbers"):
        write_dta(CodedDataset([1, 2], [], [half]), tmp_path / "h.dta")
    assert list(tmp_path.iterdir()) == []
