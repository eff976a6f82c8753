"""The command tree: every verb's and every action's --help runs and shows an example; the old word order
(`oecode VERB STUDY ACTION`) still runs; mistyped verbs, actions and options get the nearest suggestion.

The cases are read from the parser itself, so a new verb or action is covered without touching this file."""

from __future__ import annotations

import argparse
import re

import pytest

from opencode import cli
from opencode.cli import VERBS, build_parser, main, reorder


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
