"""Start-up: what `oecode` imports (not how long it takes: bench/bench_startup.py times it).

`oecode --help`, `oecode VERB [ACTION] --help` and `oecode info STUDY` load no heavy library, and a verb loads
only the libraries its work needs. Each check runs the command in a fresh interpreter and reads sys.modules."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from opencode import cli

#: Libraries that take a noticeable time to import.
HEAVY = ("sklearn", "scipy", "matplotlib", "nltk", "textual", "pandas", "psycopg", "pyreadstat", "openpyxl",
         "lxml", "vaderSentiment", "opencode.demo_job", "opencode.analysis.themes.finder")

_PROBE = r"""
import contextlib, io, json, sys
from opencode.cli import main
heavy = {heavy!r}
seen = {{}}
for words in {commands!r}:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(words)
        except SystemExit as stop:
            code = stop.code
    loaded = sorted(h for h in heavy if h in sys.modules and h not in seen)
    for name in loaded:
        seen[name] = " ".join(words)
    if code not in (0, None):
        seen["exit"] = " ".join(words) + f" -> {{code}}: {{err.getvalue()[-300:]}}"
print(json.dumps(seen))
"""


def _loaded(commands: list[list[str]]) -> dict[str, str]:
    """Run the commands one after another in a fresh interpreter: heavy library -> the command that loaded it."""
    probe = _PROBE.format(heavy=HEAVY, commands=commands)
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.splitlines()[-1])


def _help_paths() -> list[list[str]]:
    import argparse

    def subcommands(parser):
        for action in parser._actions:
            if isinstance(action, argparse._SubParsersAction):
                return dict(action.choices)
        return {}

    paths = [["--help"], ["--version"]]
    for verb in cli.VERBS:
        paths.append([verb, "--help"])
        paths += [[verb, action, "--help"] for action in subcommands(subcommands(cli.build_parser(verb))[verb])]
    return paths


def test_help_and_version_load_no_heavy_library():
    """Every verb's and every action's --help (in one interpreter: whatever any of them loads stays loaded)."""
    loaded = _loaded(_help_paths())
    assert loaded == {}, loaded


def test_top_level_help_imports_no_command_module():
    probe = ("import contextlib, io, sys\nfrom opencode.cli import main\n"
             "with contextlib.redirect_stdout(io.StringIO()):\n"
             "    try:\n        main(['--help'])\n    except SystemExit:\n        pass\n"
             "print(sorted(m for m in sys.modules if m.startswith('opencode.commands.')))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120)
    assert done.stdout.strip() == "[]", done.stdout + done.stderr


def test_info_loads_no_heavy_library(demo_copy):
    assert _loaded([["info", str(demo_copy)]]) == {}


@pytest.mark.parametrize("verb, words, allowed", [
    # tables and agreement statistics need pandas and scipy; none of them fits models, draws charts or stems
    ("tables", ["--question", "why", "--banner", "support", "--coder", "ash"], {"pandas", "scipy"}),
    ("agree", ["--question", "why", "--coders", "ash,bryn", "--resamples", "20"], {"pandas", "scipy"}),
    # each export format loads its own file-format library only: a CSV export none of them
    ("export", ["--format", "csv", "--out", "{out}.csv", "--question", "why", "--coder", "ash"],
     {"pandas", "scipy"}),
    ("export", ["--out", "{out}.sav", "--question", "why", "--coder", "ash"], {"pandas", "scipy", "pyreadstat"}),
    ("export", ["--out", "{out}.xlsx", "--question", "why", "--coder", "ash"],
     {"pandas", "scipy", "openpyxl", "lxml"}),
    ("export", ["--format", "sss", "--out", "{out}.sss", "--question", "why", "--coder", "ash"],
     {"pandas", "scipy"}),
    ("frame", ["list", "--question", "why"], set()),
    ("sample", ["list", "--question", "why"], set()),
])
def test_a_verb_loads_only_what_it_uses(demo_copy, tmp_path, verb, words, allowed):
    words = [w.replace("{out}", str(tmp_path / "out")) for w in words]
    command = [verb, *words[:1], str(demo_copy), *words[1:]] if verb in ("frame", "sample") else \
        [verb, str(demo_copy), *words]
    loaded = _loaded([command])
    assert "exit" not in loaded, loaded
    assert set(loaded) <= allowed, loaded


def test_the_light_choice_modules_say_what_their_sources_say():
    """The choices `--help` shows come from light modules that the library imports too; the one the library
    derives (the levels: nominal plus the scale levels it can compute) agrees with the light copy."""
    from opencode.analysis import choices
    from opencode.analysis.agreement.study import LEVELS

    assert choices.AGREEMENT_LEVELS == LEVELS
