"""`oecode themes ACTION STUDY`: fit, search, list, show, compare, promote, delete and clear errors (and the order
of command lines written before actions came first)."""

import re

import pytest

from opencode.analysis.themes import study as sth
from opencode.cli import main
from opencode.coding.frames import load_frame
from opencode.demo_job import build_demo_study
from opencode.study.store import Study

pytestmark = pytest.mark.filterwarnings("ignore::sklearn.exceptions.ConvergenceWarning")


@pytest.fixture(scope="module")
def study_path(tmp_path_factory):
    return str(build_demo_study(tmp_path_factory.mktemp("themes_cli") / "wrenfield.study"))


def _run(capsys, action, study, *argv):
    code = main(["themes", action, str(study), *map(str, argv)])
    out, err = capsys.readouterr()
    return code, out, err


def _run_id(out):
    return int(re.search(r"(?:theme run|k search) (\d+), question", out).group(1))


@pytest.fixture(scope="module")
def two_runs(study_path):
    with Study.open(study_path) as study:
        a = sth.question_themes(study, "why", k=5, by="support").run_id
        b = sth.question_themes(study, "why", k=6).run_id
    return a, b


def test_fit_prints_the_run(study_path, capsys, tmp_path, monkeypatch):
    monkeypatch.setenv("COLUMNS", "200")  # group labels as whole column heads (narrower: they wrap)
    chart = tmp_path / "terms.png"
    code, out, err = _run(capsys, "fit", study_path, "--question", "why", "--k", 4, "--by", "support",
                          "--chart", chart, "--random-state", 2)
    assert code == 0, err
    run_id = _run_id(out)
    with Study.open(study_path) as study:
        kept = sth.load_themes(study, run_id)
    assert kept.settings["random_state"] == 2 and kept.settings["by"] == "support"
    for theme in kept.run.themes:
        assert f"{theme.index + 1:>2}. {theme.label}" in out
        assert f"{theme.top_terms[0]} {theme.top_weights[0]:.3f}" in out
        rep = theme.representatives[0]
        assert f"{rep.score:6.3f}" in out and f"[{rep.doc_id}]" in out
    assert "Strongly oppose" in out and "Strongly support" in out and re.search(r"\bq\n", out)
    assert f"unexplained: {kept.run.n_unexplained} verbatim(s)" in out
    assert chart.read_bytes()[:4] == b"\x89PNG"
    code, again, _ = _run(capsys, "fit", study_path, "--question", "why", "--k", 4, "--by", "support",
                          "--random-state", 2)
    def body(text):  # the same seed gives the same themes; only the run id and the chart line differ
        return [line for line in text.splitlines()[1:] if "--unexplained)" not in line and "chart" not in line]
    assert code == 0 and _run_id(again) != run_id and body(again) == body(out)


def test_k_range_prints_the_curve_and_writes_the_chart(study_path, capsys, tmp_path):
    chart = tmp_path / "k.png"
    code, out, err = _run(capsys, "search", study_path, "--question", "why", "--k-range", "4:5", "--chart", chart)
    assert code == 0, err
    assert "stability" in out and "Recommended k = " in out and "final test" in out
    assert re.search(r"^\*\s*[45]\s", out, re.M)
    assert chart.read_bytes()[:4] == b"\x89PNG" and "fitting k" in err
    code, listed, _ = _run(capsys, "list", study_path, "--question", "why")
    assert re.search(rf"^{_run_id(out)}\s+k-search\s", listed, re.M)


def test_list_show_compare(study_path, capsys, two_runs):
    a, b = two_runs
    code, out, _ = _run(capsys, "list", study_path, "--question", "why")
    assert code == 0 and re.search(rf"^{a}\s+themes\s.*\bnmf\s+5\s+2\s+support\b", out, re.M)
    assert re.search(rf"^{b}\s+themes\s.*\bnmf\s+6\b", out, re.M)
    code, shown, _ = _run(capsys, "show", study_path, a)
    with Study.open(study_path) as study:
        expected = sth.format_question_themes(sth.load_themes(study, a))
        unexplained = sth.unexplained_in_run(study, a)
        comparison = sth.compare_theme_runs(study, a, b)
    assert code == 0 and shown.rstrip("\n") == expected
    code, out, _ = _run(capsys, "show", study_path, a, "--unexplained")
    assert code == 0 and f"{len(unexplained)} verbatim(s) with terms explained by no theme" in out
    assert all(str(d) in out for d in unexplained["doc_id"])
    code, out, _ = _run(capsys, "compare", study_path, a, b)
    assert code == 0 and f"run {a} (A) matched to run {b} (B)" in out
    assert len([line for line in out.splitlines() if re.match(r"^\s*\d*\s{2}\S", line)]) >= len(comparison)


def test_promote_and_delete(study_path, capsys, two_runs):
    a, b = two_runs
    code, out, err = _run(capsys, "promote", study_path, a, 3, "--question", "why", "--hotkey", "%",
                          "--actor", "bryn")
    assert code == 0, err
    number = int(re.search(r"draft code (\d+)", out).group(1))
    with Study.open(study_path) as study:
        created = load_frame(study, "why").by_number()[number]
        theme = sth.load_themes(study, a).run.themes[2]
    assert created.label == theme.label and created.hotkey == "%"
    assert f"starting rule: {created.rule}" in out and created.rule.startswith(theme.top_terms[0] + " OR ")
    assert "draft" in err
    code, out, _ = _run(capsys, "promote", study_path, a, 1, "--label", "Evening access", "--number", 40)
    assert code == 0 and "draft code 40 'Evening access'" in out
    code, out, _ = _run(capsys, "delete", study_path, b)
    assert code == 0 and f"theme run {b} deleted" in out
    code, _, err = _run(capsys, "show", study_path, b)
    assert code == 1 and f"no theme run {b}" in err


@pytest.mark.parametrize("argv, message", [
    (["show", "{s}", 999], "no theme run 999"),
    (["promote", "{s}", "RUN", 99], "run id 'RUN': give a whole number"),
    (["fit", "{s}", "--question", "why", "--k", 1], "at least 2"),
    (["search", "{s}", "--question", "why", "--k-range", "8:3"], "must not exceed"),
    (["search", "{s}", "--question", "why"], "give the range of k with --k-range"),
    (["fit", "{s}", "--k", 4], "name the open question with --question"),
    (["fit", "{s}", "--question", "why", "--k", 4, "--seed-terms", "zebra"], "'zebra' is not a term"),
    (["fit", "{s}", "--question", "improve", "--k", 4, "--seed-from-frame"], "has no code frame yet"),
])
def test_errors_are_one_clear_line(study_path, capsys, argv, message):
    code, out, err = _run(capsys, *[study_path if a == "{s}" else a for a in argv])
    assert code == 1 and message in err and "Traceback" not in err


@pytest.mark.parametrize("argv, message", [
    (["show", "{s}"], "the following arguments are required: RUN_ID"),
    (["compare", "{s}", 1], "the following arguments are required: RUN_B"),
    (["list", "{s}", "--k", 4], "unrecognized arguments: --k 4"),  # each action has only its own options
    (["fit", "{s}", "--question", "why", "--label", "x"], "unrecognized arguments: --label x"),
    (["search", "{s}", "--question", "why", "--k-range", "4:5", "--by", "support"], "unrecognized arguments: --by"),
    (["fit", "{s}", "--qeustion", "why"], "did you mean --question?"),
])
def test_misplaced_options_are_refused_by_the_parser(study_path, capsys, argv, message):
    with pytest.raises(SystemExit) as stop:
        main(["themes", *[study_path if a == "{s}" else str(a) for a in argv]])
    err = capsys.readouterr().err
    assert stop.value.code == 2 and message in err, err


def test_command_lines_of_the_old_order_still_run(study_path, capsys):
    """Before actions came first: `themes STUDY [ACTION] ...`, fit when no action was given (search with
    --k-range). Scripts written so keep running."""
    code = main(["themes", study_path, "--question", "why", "--k", "4", "--random-state", "3"])
    out = capsys.readouterr().out
    assert code == 0 and "theme run" in out
    code = main(["themes", study_path, "list", "--question", "why"])
    listed = capsys.readouterr().out
    assert code == 0 and re.search(rf"^{_run_id(out)}\s+themes\s", listed, re.M)
    code = main(["themes", study_path, "--question", "why", "--k-range", "9:3"])  # a search, by its --k-range
    assert code == 1 and "must not exceed" in capsys.readouterr().err
    code = main(["themes", study_path, "fit", "--question", "why", "--k-range", "9:3"])  # fit --k-range searched
    assert code == 1 and "must not exceed" in capsys.readouterr().err
def test_promote_of_a_missing_theme(study_path, capsys, two_runs):
    a, _ = two_runs
    code, _, err = _run(capsys, "promote", study_path, a, 9, "--question", "why")
    assert code == 1 and "there is no theme 9" in err


def test_unknown_action_is_refused_by_the_parser(study_path, capsys):
    with pytest.raises(SystemExit) as stop:
        main(["themes", "explode", study_path])
    assert stop.value.code == 2 and "invalid choice" in capsys.readouterr().err
    with pytest.raises(SystemExit) as stop:
        main(["themes", "promot", study_path])
    assert stop.value.code == 2 and capsys.readouterr().err == "oecode themes: unknown action 'promot'; did you " \
        "mean 'promote'?\n"
