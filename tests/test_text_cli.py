"""`oecode words | kwic | phrases | lexicon`: output, exit codes and clear messages."""

import re

import shutil

import pytest

from opencode.cli import main
from opencode.demo_job import build_demo_study
from opencode.study.store import Study
from opencode.text import study_text as st
from opencode.text.words import top_terms


@pytest.fixture(scope="module")
def demo_template(tmp_path_factory):
    return build_demo_study(tmp_path_factory.mktemp("demo") / "template.study")


@pytest.fixture
def path(demo_template, tmp_path):
    target = tmp_path / "demo.study"
    shutil.copy(demo_template, target)
    return str(target)


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_words_lists_top_terms_from_the_library(path, capsys):
    code, out, err = run(capsys, "words", path, "--question", "why", "--top", "5")
    assert code == 0
    with Study.open(path) as study:
        tm, frame = st.term_matrix(study, "why")
        expected = top_terms(tm, 5)
    lines = out.splitlines()
    assert lines[0] == (f"question why: {tm.counts.shape[0]:,} verbatims analysed; "
                        f"{int(frame['nonanswer'].sum()):,} non-answers left out")
    assert lines[1].split() == ["term", "count", "verbatims", "%", "forms"]
    body = lines[3:8]
    assert lines[8:] == ["", "sorted by verbatims mentioning the term (then occurrences, then term)"]
    for line, row in zip(body, expected):
        assert line.split()[:4] == [row.label, str(row.count), str(row.verbatims), f"{row.percent:.1f}"]
    assert "analysing verbatims" in err  # the progress bar of the first (uncached) run, on stderr


def test_words_within_a_group_and_small_base(path, capsys):
    code, out, err = run(capsys, "words", path, "--question", "why", "--where", "support=Strongly oppose")
    assert code == 0 and "(support = Strongly oppose)" in out.splitlines()[0]
    code, out, err = run(capsys, "words", path, "--question", "why", "--where", "age_band=75+",
                         "--where", "support=9")
    with Study.open(path) as study:
        tm, frame = st.term_matrix(study, "why")
        old, _ = st.group_mask(study, frame, "age_band=75+")
        refused, _ = st.group_mask(study, frame, "support=9")
    both = old & refused
    base = int(both[tm.rows_source].sum())
    assert 0 < base < 30
    assert code == 0 and out.splitlines()[0] == (
        f"question why: {base} verbatims analysed (age_band = 75+ and support = Refused); "
        f"{int((both & frame['nonanswer'].to_numpy()).sum())} non-answers left out")
    assert f"small base: only {base} verbatims" in err
    code, out, err = run(capsys, "words", path, "--question", "why", "--where", "support=maybe")
    assert code == 1 and "variable 'support' has no code or label 'maybe'" in err


def test_kwic_aligned_with_shown_variables(path, capsys):
    code, out, err = run(capsys, "kwic", path, "staff", "--question", "why", "--limit", "6", "--width", "25",
                         "--show", "support", "neighbourhood")
    assert code == 0
    lines = out.splitlines()
    assert re.match(r"'staff' in question why: 6 of [\d,]+ occurrences, in verbatim order$", lines[0])
    header, body = lines[1], lines[3:]
    assert header.split()[:3] == ["respondent", "support", "neighbourhood"]
    column = header.index("match")
    assert len(body) == 6
    for line in body:
        assert line[column:column + 5].lower() == "staff"  # matches line up in one column
    code, out, err = run(capsys, "kwic", path, "qwertyuiop", "--question", "why")
    assert code == 1 and "term 'qwertyuiop' is not in the vocabulary" in err
    code, out, err = run(capsys, "kwic", path, "staff", "--question", "why", "--show", "nosuchvar")
    assert code == 1 and "no variable named 'nosuchvar'" in err


def test_phrases_suggest_accept_add_remove(path, capsys):
    code, out, err = run(capsys, "phrases", "suggest", path, "--question", "why", "--top", "4", "--min-count", "10")
    assert code == 0
    ranked = [line for line in out.splitlines() if line[:3].strip().isdigit()]
    assert [line.split()[0] for line in ranked] == ["1", "2", "3", "4"]
    second = " ".join(ranked[1].split()[1:3])
    code, out, err = run(capsys, "phrases", "accept", path, "2", "--question", "why", "--actor", "ash")
    assert code == 0 and second.lower() in out
    code, out, err = run(capsys, "phrases", "add", path, "purple elephant", "--question", "why")
    assert code == 0
    assert "phrase 'purple elephant' never occurs in the verbatims of question why" in err
    with Study.open(path) as study:
        assert st.get_lexicon(study, "why").phrases == sorted([second.lower(), "purple elephant"])
    code, out, err = run(capsys, "phrases", "remove", path, "purple elephant", "--question", "why")
    assert code == 0
    code, out, err = run(capsys, "phrases", "accept", path, "9", "--question", "why")
    assert code == 1 and "no suggestion number 9" in err
    code, out, err = run(capsys, "phrases", "accept", path, "two", "--question", "why")
    assert code == 1 and "ranks are whole numbers" in err


def test_lexicon_actions(path, tmp_path, capsys):
    assert run(capsys, "lexicon", "show", path, "--question", "why")[1].startswith(
        "lexicon of question why (built-in default)")
    code, out, err = run(capsys, "lexicon", "stop-add", path, "work", "go", "--question", "why")
    assert code == 0 and "stop-add (added: work, go)" in out
    assert "now have no term left (respondent ids): WR" in err
    assert run(capsys, "lexicon", "merge", path, "libary,liberry->library", "--question", "why")[0] == 0
    assert run(capsys, "lexicon", "unmerge", path, "liberry", "--question", "why")[0] == 0
    assert run(capsys, "lexicon", "exception", path, "news", "--question", "why")[0] == 0
    assert run(capsys, "lexicon", "stem", path, "porter", "--question", "why")[0] == 0
    code, out, err = run(capsys, "lexicon", "show", path, "--question", "why")
    assert "(own)" in out.splitlines()[0]
    assert "[stop+]\ngo\nwork\n" in out and "libary -> library" in out and "news ->" in out and "porter" in out
    export = tmp_path / "why.lexicon"
    assert run(capsys, "lexicon", "export", path, str(export), "--question", "why")[0] == 0
    assert run(capsys, "lexicon", "import", path, str(export), "--question", "improve")[0] == 0
    with Study.open(path) as study:
        assert st.get_lexicon(study, "improve") == st.get_lexicon(study, "why")
        actions = [row[0] for row in study._db.execute("SELECT action FROM audit WHERE entity = 'lexicon' ORDER BY id")]
    assert actions == ["lexicon-stop-add", "lexicon-merge-add", "lexicon-merge-remove", "lexicon-exception",
                       "lexicon-stemmer", "lexicon-import"]


def test_lexicon_study_default_and_variants(path, capsys):
    assert run(capsys, "lexicon", "stop-add", path, "council", "--study-default")[0] == 0
    assert "council" in run(capsys, "lexicon", "show", path, "--question", "improve")[1]
    code, out, err = run(capsys, "lexicon", path, "variants", "--question", "why")
    assert code == 0 and out.splitlines()[0].split()[:2] == ["rare", "term"]
    assert "openning" in out or "opeen" in out  # typos planted in the demo survey


def test_lexicon_bad_input(path, tmp_path, capsys):
    code, out, err = run(capsys, "lexicon", path, "language", "welsh", "--question", "why")
    assert code == 1 and "no stemmer for language 'welsh'" in err and "stem off" in err
    assert run(capsys, "lexicon", "stem", path, "off", "--question", "why")[0] == 0
    code, out, err = run(capsys, "lexicon", path, "language", "welsh", "--question", "why")
    assert code == 0 and "no bundled stop list" in out
    code, out, err = run(capsys, "lexicon", "stem", path, "maybe", "--question", "why")
    assert code == 1 and "choose on, off, snowball or porter" in err
    code, out, err = run(capsys, "lexicon", "merge", path, "a b", "--question", "why")
    assert code == 1 and "write it as 'word,other->target'" in err
    bad = tmp_path / "bad.lexicon"
    bad.write_text("[language]\nenglish\n[stemmer]\nsnowball\n[phrases]\nopening hours\n[nonsense]\n",
                   encoding="utf-8")
    code, out, err = run(capsys, "lexicon", "import", path, str(bad), "--question", "why")
    assert code == 1 and "bad.lexicon, line 7: unknown section [nonsense]" in err
    code, out, err = run(capsys, "lexicon", "show", path, "--question", "whom")
    assert code == 1 and "no open question named 'whom'" in err
    code, out, err = run(capsys, "words", path, "--question", "whom")
    assert code == 1 and err.startswith("oecode words:") and "Traceback" not in err
    with pytest.raises(SystemExit):  # argparse: --question or --study-default is required
        main(["lexicon", "show", path])


def test_words_all_nonanswers_and_empty_corpus(tmp_path, capsys):
    source = tmp_path / "s.csv"
    source.write_text("rid,why,other\nA,n/a,fine idea\nB,dont know,good\n", encoding="utf-8")
    assert main(["new", str(tmp_path / "s.study"), "--from", str(source), "--id", "rid", "--question", "why",
                 "--question", "other"]) == 0
    capsys.readouterr()
    code, out, err = run(capsys, "words", str(tmp_path / "s.study"), "--question", "why")
    assert code == 1 and "all 2 verbatims of question 'why' are non-answers" in err


def test_text_commands_are_quiet_about_absent_phrases_the_lexicon_verb_names_once(demo_folder, capsys):
    # The demo's lexicon has phrases that never occur in question why (it is shared with question improve).
    study = str(demo_folder / "wrenfield.study")
    with Study.open(study) as opened:
        absent = st.term_matrix(opened, "why")[0].absent_phrases
    assert absent, "the demo lexicon should hold a phrase question why never uses"
    for argv in (["words", study, "--question", "why"], ["kwic", study, "library", "--question", "why"]):
        code, out, err = run(capsys, *argv)
        assert code == 0
        assert "phrase" not in err, err
    code, out, err = run(capsys, "lexicon", "show", study, "--question", "why")
    assert code == 0
    for phrase in absent:
        assert err.count(f"phrase {phrase!r} never occurs in the verbatims of question why") == 1
