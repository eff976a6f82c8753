"""The desk on a server study: key presses commit to the server, and other people's changes arrive by
themselves (the change feed), with the desk's timer refresh switched off so only the feed can bring them."""

from __future__ import annotations

import asyncio

from opencode.coding import assignments as coding
from opencode.coding import frames
from opencode.study.store import Study
from opencode.study.transfer import push
from opencode.tui.app import DeskApp
from opencode.tui.session import DeskSession
from team_server import study_name


async def _until(pilot, check, seconds: float = 10.0) -> bool:
    for _ in range(int(seconds / 0.1)):
        if check():
            return True
        await pilot.pause(0.1)
    return check()


def test_the_desk_hears_frame_edits_and_other_coders_without_refreshing(pg_server, demo_base):
    address = pg_server.address(study=study_name("desk"))
    push(demo_base, address)

    async def scenario() -> None:
        app = DeskApp(DeskSession(address, "why", "kit", clock=lambda: 0.0), refresh_seconds=0, show_pace=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.pause()
            shown = app.session.current_id
            await pilot.press("s")  # kit's press is on the server before the screen changes
            with Study.open(address) as other:
                assert [c.number for c in coding.codes_of(other, shown, "kit")] == [1]
                frames.edit_code(other, "why", 2, actor="lead", label="Relabelled while kit codes")
                assert await _until(pilot, lambda: app.session.code(2).label == "Relabelled while kit codes")
                refreshed = []
                original = app.session.refresh
                app.session.refresh = lambda: (refreshed.append(1), original())[1]
                coding.assign(other, shown, 2, "bryn")  # bryn codes the verbatim kit is looking at
                assert await _until(pilot, lambda: len(refreshed) == 1)
                assert ("bryn", 2) in [(c, n) for c, n, _ in app.session.others()]
            assert app.screen._changes is not None and app.screen._changes.running
            feed = app.screen._changes
        assert not feed.running  # the feed stops with the desk

    asyncio.run(scenario())


def test_a_desk_on_a_study_file_starts_no_feed(tmp_path):
    from helpers import make_desk_study

    path = make_desk_study(tmp_path)

    async def scenario() -> None:
        app = DeskApp(DeskSession(path, "why", "ash", clock=lambda: 0.0), refresh_seconds=0, show_pace=False)
        async with app.run_test() as pilot:
            await pilot.pause()
            assert app.screen._changes is None

    asyncio.run(scenario())
