"""Keys typed faster than the desk draws act in the order typed, each on the verbatim its predecessors left.

Textual's pilot normally waits for the app to go idle after every key; here 200 key events go to the app's
driver at once (what a paste or a very fast coder produces), and the codes on disk and the audit trail must
equal what the same keys give when applied one by one to a model of the desk.
"""

from __future__ import annotations

import asyncio
import random

from textual import events
from textual.keys import _character_to_key

from opencode.coding import frames
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study.store import Study

from helpers import make_app, on_disk, wait_for

TEXTS = ["Not safe at night", "n/a", "Great for students", "Staff jobs cut", "", "Shift workers win",
         "don't know", "Quieter evenings", "Costs too much", "Good for families", "Parking is hard", "Fine"]
HOTKEYS = {"s": 1, "j": 2, "h": 3, "S": 4, "7": 5, "-": 6}


def make_study(folder):
    """Twelve invented answers (three of them non-answers, not served) and six codes, one on each kind of key:
    lower and upper case letters, a digit and punctuation."""
    csv = folder / "survey.csv"
    csv.write_text("rid,why\n" + "".join(f"K{i},{t}\n" for i, t in enumerate(TEXTS)), encoding="utf-8")
    path = folder / "keys.study"
    import_survey(path, csv, ImportOptions("rid", ["why"]))
    with Study.open(path) as study:
        for key, number in HOTKEYS.items():
            frames.add_code(study, "why", f"Code {number}", number=number, hotkey=key)
    return path


def served_ids(path) -> list[int]:
    return [r[0] for r in on_disk(path, "SELECT id FROM verbatims WHERE nonanswer = 0 ORDER BY id")]


def expected(keys: list[str], ids: list[int]) -> tuple[list[tuple[str, int, int]], set[tuple[int, int]], set[int]]:
    """The desk applied by hand: (action, verbatim, code) per code key, final hand codes and done marks."""
    position, held, done, trail = 0, set(), set(), []
    for key in keys:
        here = ids[position]
        if key == "right":
            position = min(position + 1, len(ids) - 1)
        elif key == "left":
            position = max(position - 1, 0)
        elif key == "enter":  # mark done, then the next verbatim neither coded nor marked (wrapping round)
            if here not in done:
                done.add(here)
                trail.append(("mark", here, 0))
            coded = {v for v, _ in held} | done
            later = [v for v in ids if v > here and v not in coded] or [v for v in ids if v not in coded]
            if later:
                position = ids.index(later[0])
        else:
            number = HOTKEYS[key]
            if (here, number) in held:
                held.remove((here, number))
                trail.append(("unassign", here, number))
            else:
                held.add((here, number))
                trail.append(("assign", here, number))
    return trail, held, done


def key_event(key: str) -> events.Key:
    """The event a terminal key produces, as Textual's pilot builds it."""
    if len(key) == 1:
        return events.Key(_character_to_key(key) if not key.isalnum() else key, key)
    return events.Key(key, "\r" if key == "enter" else None)


def test_200_keys_without_a_pause_land_in_order(tmp_path):
    path = make_study(tmp_path)
    ids = served_ids(path)
    rng = random.Random(20240611)
    keys = [rng.choice([*HOTKEYS, *HOTKEYS, "right", "right", "left", "enter"]) for _ in range(200)]
    trail, held, done = expected(keys, ids)
    assert len(trail) > 100 and any(a == "unassign" for a, _, _ in trail)  # the sequence exercises toggling off

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            for key in keys:  # no pause between keys: they queue up while the desk is still drawing
                event = key_event(key)
                event.set_sender(app)
                app._driver.send_message(event)
            await wait_for(pilot, lambda: on_disk(path, "SELECT COUNT(*) FROM audit WHERE actor = 'ash'")[0][0]
                           >= len(trail))
            await pilot.pause(0.2)

    asyncio.run(scenario())
    audit = on_disk(path, "SELECT action, entity_id, COALESCE(json_extract(payload, '$.number'), 0) FROM audit "
                          "WHERE actor = 'ash' ORDER BY id")
    assert [tuple(row) for row in audit] == trail
    hand = on_disk(path, "SELECT a.verbatim_id, c.number FROM assignments a JOIN codes c ON c.id = a.code_id "
                         "WHERE a.coder = 'ash' AND a.source = 'hand'")
    assert set(map(tuple, hand)) == held
    marks = on_disk(path, "SELECT verbatim_id FROM coded_marks WHERE coder = 'ash'")
    assert {r[0] for r in marks} == done
