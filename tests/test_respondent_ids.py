"""Lists a user acts on name verbatims by the survey's respondent id, the id the desk's go-to takes."""

from __future__ import annotations

from opencode.coding import machine_coding, rules
from opencode.study import desk_queries as dq
from opencode.study import survey_data
from opencode.study.store import Study


def _go_to(study: Study, question: str, respondent: str) -> int | None:
    """What the desk's go-to opens for a respondent id (tui/session.py go_to_respondent asks this)."""
    return dq.verbatim_of_respondent(study, survey_data.get_question(study, question).id, respondent)


def test_rule_dry_run_names_respondents(demo_folder):
    with Study.open(demo_folder / "wrenfield.study") as study:
        hits = rules.rule_hits(study, "why", "staff OR librarian")
        assert hits.count > 10 and len(hits.respondents) == hits.count
        assert all(r.startswith("WR") for r in hits.respondents)
        assert [_go_to(study, "why", r) for r in hits.respondents] == hits.verbatim_ids


def test_machine_queues_name_respondents(demo_folder):
    with Study.open(demo_folder / "wrenfield.study") as study:
        learn = machine_coding.learning_queue(study, "why", "final", n=5)
        second = machine_coding.second_look_queue(study, "why", n=5, strength=0.6)
        assert learn and second
        for item in learn + second:
            assert item["respondent"].startswith("WR")
            assert _go_to(study, "why", item["respondent"]) == item["verbatim_id"]
        ids = [item["verbatim_id"] for item in learn]
        assert machine_coding.respondent_ids(study, "why", ids) == [item["respondent"] for item in learn]


def test_the_curve_suggests_a_threshold_it_can_justify(demo_folder):
    with Study.open(demo_folder / "wrenfield.study") as study:
        report = machine_coding.curve(study, "why")
    assert report.suggested_threshold is not None and report.suggestion
    row = next(r for r in report.rows if r["threshold"] == report.suggested_threshold)
    reaching = [r for r in report.rows if r["verbatims"] and r["accuracy"] >= machine_coding.ADVICE_ACCURACY]
    if reaching:  # the lowest threshold that reaches the accuracy aimed for
        assert report.suggested_threshold == min(r["threshold"] for r in reaching)
        assert "reaching 90% accuracy" in report.suggestion
    else:  # else the most accurate one
        assert row["accuracy"] == max(r["accuracy"] for r in report.rows if r["verbatims"])
