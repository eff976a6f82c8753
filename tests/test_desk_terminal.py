"""The desk in a real terminal: `python -m opencode code` in tmux at 80x24, typed at with `send-keys`, read with
`capture-pane` (tests/desk_terminal.py), every change checked in the study file through a second connection.

Covers what a coder meets (full labels, code notes, non-answers held back, suggestions, messages, other
coders' codes, compare, the terms screen's drivers and Ctrl+Q) and fast typing 10 to 30 ms apart.
"""

from __future__ import annotations

import random
import sys
import time

import pytest

from opencode.coding import assignments as coding
from opencode.study.store import Study

from desk_terminal import TmuxTerminal
from helpers import make_desk_study, on_disk, require_program
from test_desk_day import LONG, hand, study_with_notes
from test_desk_drivers import make_study as make_drivers_study
from test_desk_keys import HOTKEYS, expected, make_study as make_keys_study, served_ids

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs tmux")


@pytest.fixture
def terminal():
    tmux = require_program("tmux")
    term = TmuxTerminal(tmux, env={"TERM": "xterm-256color"}).start()
    yield term
    term.close()


def open_desk(terminal: TmuxTerminal, path, ready=lambda screen: True) -> str:
    terminal.send(f"exec {sys.executable} -m opencode code {path} --question why --coder ash --refresh 0",
                  literal=True)
    terminal.send("Enter")
    terminal.wait_for(lambda s: "coded (" in s and "palette" in s and ready(s), timeout=90)
    return terminal.settle()


def panel(screen: str) -> str:
    """The frame panel's words (right of the desk's left column at 80 columns)."""
    return words(" ".join(line[48:] for line in screen.splitlines()))


def words(text: str) -> str:
    return " ".join(w for w in text.split() if w not in "│╭╮╰╯")


def test_a_coders_day_in_a_real_terminal(terminal, tmp_path):
    path = study_with_notes(tmp_path)
    with Study.open(path) as study:
        coding.assign(study, 1, 2, "bryn")
        coding.assign(study, 2, 3, "final", source="machine", confidence=0.42)
        coding.set_codes(study, 4, [1], "bryn")
        coding.set_codes(study, 4, [2], "cai")
    screen = open_desk(terminal, path, lambda s: LONG in panel(s) and "others: bryn" in s)  # 1: labels in full
    lines = screen.splitlines()
    assert len(lines) == 24 and all(len(line) <= 80 for line in lines)
    assert "Not safe without staff" in panel(screen) and "Convenient hours" in panel(screen)
    top = next(i for i, line in enumerate(lines) if "╭" in line)
    assert "╰" in lines[top + 2] and "Not safe without staff at night" in lines[top + 1]  # 1: box fits its text
    assert "1 of 4" in screen and "0/4 coded" in screen  # 3: the non-answer A3 is not served
    assert "others: bryn j 2 Staff jobs" in screen  # 6: hotkey and label of others' codes

    terminal.send("s", literal=True)
    terminal.wait_for(lambda s: "+ 1 Not safe without staff" in s)
    text = words(terminal.settle())
    for note in ("Worried about safety with no staff present", "include: fear, unsafe, security guards",
                 "exclude: staff losing jobs (code 2)"):
        assert note in text  # 2: the pressed code's notes
    terminal.send("Right")
    terminal.wait_for(lambda s: "respondent A2" in s and "machine 42%" in s)
    screen = terminal.settle()
    assert "+ 1 Not safe" not in screen  # 5: the message went with A1
    assert "→ h 3 Convenient hours" in screen  # 4: final's suggestion reaches ash
    terminal.send("C-k")
    terminal.wait_for(lambda s: "accepted 3 Convenient hours" in s)
    assert hand(path, "A2") == [3]
    terminal.send("C-z")
    terminal.wait_for(lambda s: "undone: assign of 3 Convenient hours on respondent A2" in s)  # 5
    assert hand(path, "A2") == [] and hand(path, "A2", "final", "machine") == [3]

    terminal.send("F3")
    screen, _ = terminal.wait_for(lambda s: "code frame of why" in s and "esc desk" in s.splitlines()[-1])
    header = screen.splitlines()[1]
    assert all(title in header for title in ("key", "no.", "label", "mine", "uses", "state"))  # 1: 80x24 frame
    terminal.send("Escape")
    terminal.wait_for(lambda s: "respondent A2" in s)
    terminal.send("F6")  # 7: compare the two most active coders, ash and bryn, who differ on A1
    screen, _ = terminal.wait_for(lambda s: "compare" in s and "settled" in s and "esc desk" in s.splitlines()[-1])
    assert "compare ash with bryn" in screen and "0 of 1 settled" in screen
    terminal.send("u", literal=True)
    terminal.wait_for(lambda s: "1 of 1 settled" in s and "✓ settled" in s and
                      "A1: final now holds 1 Not safe without staff, 2 Staff jobs" in words(s))
    assert hand(path, "A1", "final") == [1, 2]
    terminal.send("C-q")
    assert terminal.wait_exit(30) >= 0
    assert on_disk(path, "PRAGMA integrity_check") == [("ok",)]


def test_drivers_stop_on_quit_in_a_real_terminal(terminal, tmp_path):
    path = make_drivers_study(tmp_path)
    open_desk(terminal, path)
    terminal.send("F4")
    terminal.wait_for(lambda s: "drivers: fitting" in s or "cross-validated AUC" in s, timeout=60)  # 8: progress
    terminal.send("C-q")
    terminal.wait_exit(30)
    time.sleep(0.2)
    import subprocess
    left = subprocess.run(["pgrep", "-f", f"drivers_job {path}"], capture_output=True, text=True).stdout.split()
    assert left == []  # the fit did not outlive the desk


def test_keys_typed_10_to_30_ms_apart_land_in_order(terminal, tmp_path):
    path = make_keys_study(tmp_path)
    ids = served_ids(path)
    rng = random.Random(77)
    keys = [rng.choice([*HOTKEYS, *HOTKEYS, "right", "right", "left", "enter"]) for _ in range(60)]
    trail, held, done = expected(keys, ids)
    open_desk(terminal, path)
    names = {"right": "Right", "left": "Left", "enter": "Enter"}
    for key in keys:
        terminal.send(names.get(key, key), literal=key not in names)
        time.sleep(rng.uniform(0.010, 0.030))
    end = time.monotonic() + 60
    while on_disk(path, "SELECT COUNT(*) FROM audit WHERE actor = 'ash'")[0][0] < len(trail) and time.monotonic() < end:
        time.sleep(0.1)
    terminal.send("C-q")
    terminal.wait_exit(30)
    audit = on_disk(path, "SELECT action, entity_id, COALESCE(json_extract(payload, '$.number'), 0) FROM audit "
                          "WHERE actor = 'ash' ORDER BY id")
    assert [tuple(row) for row in audit] == trail
    found = on_disk(path, "SELECT a.verbatim_id, c.number FROM assignments a JOIN codes c ON c.id = a.code_id "
                          "WHERE a.coder = 'ash' AND a.source = 'hand'")
    assert set(map(tuple, found)) == held


def test_text_typed_or_pasted_right_after_a_dialog_key_arrives_whole(terminal, tmp_path):
    """The dialog key and the text go to the terminal with no pause: typed (send-keys) into the new-code dialog,
    pasted (tmux paste-buffer, a bracketed paste) into the note; the study holds exactly the text, and none of
    its letters (s, j, h are code hotkeys) acted on the verbatim."""
    text = "Why? 50% / late-night, [Sunday] & cafe shj"
    path = make_desk_study(tmp_path)
    open_desk(terminal, path)
    terminal.send("Right", "s", "C-o")
    terminal.send(text, literal=True)
    terminal.send("Enter")
    terminal.wait_for(lambda s: "added 91" in s)
    assert on_disk(path, "SELECT number FROM codes WHERE label = ?", (text,)) == [(91,)]
    terminal.send("C-n")
    terminal.paste(text)
    terminal.send("Enter")
    terminal.wait_for(lambda s: "note saved" in s)
    terminal.send("C-q")
    terminal.wait_exit(30)
    assert on_disk(path, "SELECT r.key, n.text FROM notes n JOIN verbatims v ON v.id = n.verbatim_id JOIN "
                         "respondents r ON r.id = v.respondent_id WHERE n.coder = 'ash'") == [("A2", text)]
    assert hand(path, "A2") == [1, 91] and hand(path, "A1") == []
    assert on_disk(path, "SELECT COUNT(*) FROM audit WHERE actor = 'ash' AND action IN ('assign', 'unassign')") \
        == [(2,)]


def test_markup_in_labels_does_not_break_the_terminal(terminal, tmp_path):
    path = make_desk_study(tmp_path)
    from opencode.coding import frames
    with Study.open(path) as study:
        frames.add_code(study, "why", "x[/] and [/]evil [word]", number=7, hotkey="x")
    screen = open_desk(terminal, path)
    assert "x[/] and [/]evil [word]" in screen
    terminal.send("x", literal=True)
    terminal.wait_for(lambda s: "+ 7 x[/] and [/]evil [word]" in s)
    terminal.send("C-q")
    terminal.wait_exit(30)
