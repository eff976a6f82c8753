"""The command tree: every verb's and every action's --help runs and shows an example; the old word order
(`oecode VERB STUDY ACTION`) still runs; mistyped verbs, actions and options get the nearest suggestion.

The cases are read from the parser itself, so a new verb or action is covered without touching this file."""

from __future__ import annotations

import argparse
import re
import shlex

import pytest

from opencode import cli
from opencode.cli import VERBS, build_parser, main, parse, reorder
from opencode.files.help_text import fold_command, unfold_command


def _subcommands(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    return {}


def _tree() -> list[tuple[str, ...]]:
    paths = []
    for verb in VERBS:
        verb_parser = _subcommands(build_parser(verb))[verb]
        paths.append((verb,))
        paths += [(verb, action) for action in _subcommands(verb_parser)]
    return paths


TREE = _tree()


def _parser_of(path: tuple[str, ...]) -> argparse.ArgumentParser:
    parser = build_parser(path[0])
    for word in path:
        parser = _subcommands(parser)[word]
    return parser


def test_the_tree_has_the_verbs_with_actions():
    assert {("frame", "add"), ("frame", "list"), ("themes", "fit"), ("themes", "search"), ("themes", "promote"),
            ("sample", "draw"), ("lexicon", "stop-add"), ("phrases", "suggest"), ("model", "train"),
            ("sentiment", "mix"), ("team", "grant")} <= set(TREE)
    assert len(TREE) > 60


@pytest.mark.parametrize("path", TREE, ids=" ".join)
def test_help_runs_and_shows_an_example(path, capsys):
    with pytest.raises(SystemExit) as stop:
        main([*path, "--help"])
    out = capsys.readouterr().out
    assert stop.value.code == 0
    assert out.startswith(f"usage: oecode {' '.join(path)}")
    parser = _parser_of(path)
    options = [a for a in parser._actions if a.option_strings and a.dest != "help"]
    actions = _subcommands(parser)
    if options or actions:  # an example command line of this very verb / action
        assert re.search(rf"^  oecode {re.escape(' '.join(path))}( |$)", out, re.M), out
    if actions:  # a verb with actions lists them, each with its help
        for name, sub in actions.items():
            assert re.search(rf"^    {re.escape(name)}\b", out, re.M)


def _help_at(path: tuple[str, ...], columns: int, monkeypatch, capsys) -> str:
    monkeypatch.setenv("COLUMNS", str(columns))
    with pytest.raises(SystemExit) as stop:
        main([*path, "--help"])
    assert stop.value.code == 0
    return capsys.readouterr().out


def _examples(text: str) -> list[list[str]]:
    """The example command lines of a help text, each as its lines (one, or several continued by a backslash)."""
    examples, lines = [], text.splitlines()
    for index, line in enumerate(lines):
        if line.startswith("  oecode ") and not (index and lines[index - 1].endswith("\\")):
            example = [line]
            while example[-1].endswith("\\"):
                example.append(lines[index + len(example)])
            examples.append(example)
    return examples


@pytest.mark.parametrize("path", [()] + TREE, ids=lambda p: " ".join(p) or "oecode")
def test_help_fits_80_columns_and_its_examples_run(path, monkeypatch, capsys):
    """At COLUMNS=80 no help line is wider than 80 (descriptions, notes, examples included), and every example,
    folded or not, is a command line the parser takes (a folded one copies into a shell as one command)."""
    out = _help_at(path, 80, monkeypatch, capsys)
    wide = [line for line in out.splitlines() if len(line) > 80]
    assert not wide, "\n".join(wide)
    examples = _examples(out)
    assert examples or not path
    for example in examples:
        words = shlex.split(" ".join(example).replace("\\ ", ""))  # as a shell joins continued lines
        assert words == shlex.split(unfold_command(example))
        assert words[0] == "oecode"
        parse(words[1:])  # an example that no longer parses raises SystemExit(2) here


def test_a_wide_example_is_folded_between_options_and_kept_whole():
    line = '  oecode frame add survey.study --question why --label "Opening hours" --hotkey h'
    assert len(line) > 80
    folded = fold_command(line, 78)
    assert folded == ['  oecode frame add survey.study --question why --label "Opening hours" \\',
                      "      --hotkey h"]
    assert unfold_command(folded) == line.strip()
    narrow = fold_command(line, 30)  # a group wider than a line is cut between its words, never inside one
    assert all(len(part) <= 30 for part in narrow), narrow
    assert shlex.split(unfold_command(narrow)) == shlex.split(line)


def test_wide_terminals_leave_examples_on_one_line(monkeypatch, capsys):
    out = _help_at(("frame", "add"), 200, monkeypatch, capsys)
    assert '  oecode frame add survey.study --question why --label "Opening hours" --hotkey h\n' in out
    out = _help_at(("themes", "fit"), 200, monkeypatch, capsys)  # notes stay readable: at most 100 columns
    note = out.split("Themes from short verbatims")[1].split("\n\n")[0]
    assert max(map(len, note.splitlines())) <= 100 and len(note.splitlines()) > 3


@pytest.mark.parametrize("path", [p for p in TREE if len(p) == 2], ids=" ".join)
def test_each_action_has_only_its_own_options(path):
    """No action offers options that only another action reads (the reason for subcommands)."""
    parser = _parser_of(path)
    assert len([a for a in parser._actions if a.option_strings]) <= 16


def test_top_level_help_lists_every_verb_with_the_help_its_module_gives(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["--help"])
    out = capsys.readouterr().out
    assert stop.value.code == 0
    for verb, (_, help_text) in VERBS.items():
        registered = _subcommands(build_parser(verb))
        choice = next(a for a in build_parser(verb)._actions if isinstance(a, argparse._SubParsersAction))
        module_help = next(c.help for c in choice._choices_actions if c.dest == verb)
        assert module_help == help_text, verb  # the static table says what the module says
        assert verb in registered
        assert re.search(rf"^    {verb}\b", out, re.M)


def test_version(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["--version"])
    assert stop.value.code == 0 and capsys.readouterr().out.startswith("oecode ")


@pytest.mark.parametrize("words, expected", [
    (["frame", "s.study", "add", "--question", "q"], ["frame", "add", "s.study", "--question", "q"]),
    (["frame", "s.study", "--question", "q", "list"], ["frame", "list", "s.study", "--question", "q"]),
    (["frame", "s.study", "--question", "list", "add"], ["frame", "add", "s.study", "--question", "list"]),
    (["themes", "s.study", "promote", "3", "2"], ["themes", "promote", "s.study", "3", "2"]),
    (["frame", "add", "s.study"], ["frame", "add", "s.study"]),
    (["frame", "--help"], ["frame", "--help"]),
    (["lexicon", "s.study", "stop-add", "show"], ["lexicon", "stop-add", "s.study", "show"]),
])
def test_reorder_puts_the_action_first(words, expected):
    actions = _subcommands(_subcommands(build_parser(words[0]))[words[0]])
    assert reorder(words, 0, actions) == expected


def test_old_order_runs_like_the_new(demo_copy, capsys):
    assert main(["frame", demo_copy, "list", "--question", "why"]) == 0
    old = capsys.readouterr().out
    assert main(["frame", "list", demo_copy, "--question", "why"]) == 0
    assert capsys.readouterr().out == old and "codes" in old
    assert main(["lexicon", demo_copy, "show", "--question", "why"]) == 0
    old = capsys.readouterr().out
    assert main(["lexicon", "show", demo_copy, "--question", "why"]) == 0
    assert capsys.readouterr().out == old
    assert main(["frame", demo_copy, "edit", "--question", "why", "--code", "1", "--label", "Safe"]) == 0
    capsys.readouterr()
    assert main(["frame", demo_copy, "undo", "--question", "why"]) == 0  # undo took --question before: still does
    assert capsys.readouterr().out.startswith("undo: ")
    assert main(["sample", demo_copy, "list", "--question", "why"]) == 0


@pytest.mark.parametrize("words, message", [
    (["fram", "s.study"], "oecode: unknown verb 'fram'; did you mean 'frame'?\n"),
    (["zzzz"], "oecode: unknown verb 'zzzz'; oecode --help lists the verbs\n"),
    (["frame", "ad", "s.study"], "oecode frame: unknown action 'ad'; did you mean 'add'?\n"),
    (["frame", "s.study", "ad"], "oecode frame: unknown action 'ad'; did you mean 'add'?\n"),
    (["sample", "drwa", "s.study"], "oecode sample: unknown action 'drwa'; did you mean 'draw'?\n"),
])
def test_mistyped_verb_or_action_is_one_line_with_the_nearest(words, message, capsys):
    with pytest.raises(SystemExit) as stop:
        main(words)
    assert stop.value.code == 2 and capsys.readouterr().err == message


@pytest.mark.parametrize("words, message", [
    (["frame", "list", "s.study", "--qeustion", "why"], "did you mean --question?"),
    (["model", "queue", "s.study", "--question", "why", "--kind", "secnd-look"], "did you mean 'second-look'?"),
    (["frame", "add", "s.study", "--question", "why", "--lable", "x"], "did you mean --label?"),
    (["model", "train", "s.study", "--question", "why", "--kind", "learn"], "--kind is an option of oecode model "
     "queue"),
    (["frame", "list", "s.study", "--question", "why", "--into", "3"], "--into is an option of oecode frame merge "
     "and oecode frame delete"),
])
def test_mistyped_option_or_choice_suggests_the_nearest(words, message, capsys):
    with pytest.raises(SystemExit) as stop:
        main(words)
    err = capsys.readouterr().err
    assert stop.value.code == 2 and err.rstrip().endswith(message), err
    assert err.splitlines()[-1].startswith(f"oecode {words[0]} {words[1]}: error:")


def test_a_broken_command_module_fails_loudly(monkeypatch):
    monkeypatch.setitem(cli.VERBS, "broken", ("no_such_module", "a verb whose module is missing"))
    with pytest.raises(ModuleNotFoundError):
        main(["broken"])
