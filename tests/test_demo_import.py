"""The demo survey imports the same study from its CSV (with the data map) and from its .sav."""

from __future__ import annotations

import numpy as np

from opencode.demo_job import build_demo_study
from opencode.study import survey_data
from opencode.study.store import Study


def _content(path):
    with Study.open(path) as study:
        variables = {v.name: (v.label, v.kind, v.role, v.value_labels, v.missing_codes)
                     for v in survey_data.list_variables(study)}
        values = {name: survey_data.raw_values(study, name) for name, spec in variables.items()
                  if spec[2] not in ("id", "question")}
        verbatims = {q: survey_data.verbatims(study, q)[["respondent", "text", "nonanswer"]]
                     for q in ("why", "improve")}
        return survey_data.respondent_keys(study), variables, values, verbatims


def test_csv_and_sav_give_the_same_study(tmp_path):
    keys_csv, vars_csv, values_csv, verb_csv = _content(build_demo_study(tmp_path / "csv.study", "csv"))
    keys_sav, vars_sav, values_sav, verb_sav = _content(build_demo_study(tmp_path / "sav.study", "sav"))
    assert keys_csv == keys_sav and len(keys_csv) == 2400
    assert vars_csv == vars_sav
    for name in values_csv:
        np.testing.assert_allclose(values_csv[name], values_sav[name], equal_nan=True, err_msg=name)
    for question in verb_csv:
        assert verb_csv[question].equals(verb_sav[question]), question


def test_oecode_demo_builds_the_study_and_prints_where(demo_run):
    assert demo_run.status == 0
    assert "2,400 respondents" in demo_run.printed and "wrenfield.study" in demo_run.printed
    assert (demo_run.folder / "wrenfield.study").exists()
