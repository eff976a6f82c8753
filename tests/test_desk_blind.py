"""Blind double coding at the desk: other coders' codes stay hidden on reliability-sample verbatims."""

from __future__ import annotations

from opencode.coding import assignments, frame_io, reliability
from opencode.demo_job import build_demo_study
from opencode.resources import demo_dir
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.tui.session import DeskSession


def test_other_coders_hidden_only_inside_the_coders_sample(tmp_path):
    path = build_demo_study(tmp_path / "demo.study")
    with Study.open(path) as study:
        frame_io.import_frame(study, "why", demo_dir() / "frame-why.csv")
        sample = reliability.draw_sample(study, "why", "rel", n=20, random_state=1)
        reliability.assign_sample(study, "why", "rel", ["ash", "bryn"])
        inside = int(sample.verbatim_ids[0])
        ids = survey_data.verbatims(study, "why", include_nonanswers=False)["verbatim_id"].tolist()
        outside = next(v for v in ids if v not in set(int(x) for x in sample.verbatim_ids))
        for verbatim in (inside, outside):
            assignments.assign(study, verbatim, 1, "bryn")
    session = DeskSession(path, "why", "ash")
    try:
        session.go_to_id(inside)
        assert session.others() == []
        session.go_to_id(outside)
        assert [(coder, number) for coder, number, _ in session.others()] == [("bryn", 1)]
    finally:
        session.study.close()
