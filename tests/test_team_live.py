"""Many writers at once on a real server: changes reach other desks as they happen (LISTEN/NOTIFY), nobody's
write is lost, undo stays per coder, and a busy row or a dropped connection is a clear, retryable error."""

from __future__ import annotations

import threading
import time

import psycopg
import pytest

from opencode.coding import assignments as coding
from opencode.coding import frames, history
from opencode.errors import StudyBusy, WriteFailed
from opencode.study import survey_data
from opencode.study.changes import ChangeFeed, StudyChange, subscribe
from opencode.study.store import Study
from opencode.study.transfer import push
from team_server import study_name


@pytest.fixture
def shared(pg_server, demo_base):
    """A fresh server copy of the double-coded demo; returns its address and a few verbatim ids."""
    address = pg_server.address(study=study_name("live"))
    push(demo_base, address)
    with Study.open(address) as study:
        ids = survey_data.verbatims(study, "why", include_nonanswers=False)["verbatim_id"].tolist()
        codes = [c.number for c in frames.load_frame(study, "why").codes if not c.is_net and c.active]
    return address, ids, codes


def test_a_desk_hears_another_coders_press_when_it_commits(shared):
    address, ids, codes = shared
    with ChangeFeed(address) as feed, Study.open(address) as other:
        assert feed.wait(timeout=0.2) == []
        coding.toggle(other, ids[0], codes[0], "kit")
        heard = feed.wait(timeout=5)
        assert StudyChange("assignments", "insert", "kit", ids[0]) in heard
        assert any(c.table == "audit" for c in heard) is False  # the audit trail is not announced
        # a change rolled back is never announced
        with pytest.raises(RuntimeError):
            with other.transaction():
                coding.toggle(other, ids[1], codes[0], "kit")
                raise RuntimeError("the coder's program stops half-way")
        assert feed.wait(timeout=0.5) == []
        frames.edit_code(other, "why", codes[1], actor="lead", label="Relabelled")
        heard = feed.wait(timeout=5)
        assert heard and all(c.frame_changed for c in heard if c.table == "codes")


def test_subscribe_leaves_out_the_desks_own_presses_but_not_frame_changes(shared):
    address, ids, codes = shared
    got: list[list[StudyChange]] = []
    arrived = threading.Event()

    def callback(changes):
        got.append(changes)
        arrived.set()

    subscription = subscribe(address, callback, ignore_coder="kit")
    try:
        time.sleep(0.3)  # the feed is listening
        with Study.open(address) as study:
            coding.toggle(study, ids[0], codes[0], "kit")      # kit's own press: not news to kit's desk
            coding.toggle(study, ids[0], codes[0], "bryn")     # bryn's: news
        assert arrived.wait(timeout=5)
        time.sleep(0.3)
        seen = [c for batch in got for c in batch]
        assert {c.coder for c in seen} == {"bryn"}
    finally:
        subscription.stop()
    assert not subscription.running and subscription.error is None


def test_a_study_files_feed_notices_other_connections_commits(demo_copy):
    with ChangeFeed(demo_copy) as feed, Study.open(demo_copy) as other:
        assert feed.wait(timeout=0.3) == []
        verbatim = int(survey_data.verbatims(other, "why")["verbatim_id"].iloc[3])
        coding.mark_done(other, verbatim, "kit")
        assert feed.wait(timeout=3) == [StudyChange("*", "change")]


def test_twenty_writers_lose_nothing_and_undo_stays_per_coder(shared):
    address, ids, codes = shared
    coders = [f"c{i:02d}" for i in range(20)]
    errors: list[BaseException] = []

    def work(coder: str) -> None:
        try:
            with Study.open(address) as study:
                for verbatim in ids[:15]:
                    coding.toggle(study, verbatim, codes[0], coder)
                coding.toggle(study, ids[0], codes[1], coder)
        except BaseException as error:  # surfaced below
            errors.append(error)

    threads = [threading.Thread(target=work, args=(c,)) for c in coders]
    for thread in threads:
        thread.start()
    with Study.open(address) as lead:  # the lead adjudicates meanwhile
        for verbatim in ids[:15]:
            coding.assign(lead, verbatim, codes[2], "final")
    for thread in threads:
        thread.join()
    assert errors == []
    with Study.open(address) as study:
        table = coding.assignments(study, "why", coders + ["final"])
        counts = table.groupby("coder").size().to_dict()
        assert counts == {**{c: 16 for c in coders}, "final": 15}
        assert not table.duplicated(["verbatim_id", "number", "coder"]).any()
        # c00's undo takes back c00's last press only
        assert history.undo(study, "c00") == "assign"
        assert [x.number for x in coding.codes_of(study, ids[0], "c00")] == [codes[0]]
        assert sorted(x.number for x in coding.codes_of(study, ids[0], "c01")) == sorted(codes[:2])


def test_a_row_held_by_another_transaction_is_a_retryable_busy_error(shared, pg_server):
    address, ids, codes = shared
    with Study.open(address) as holder, Study.open(address) as waiter:
        waiter._db.admin("SET lock_timeout = '200ms'")
        coding.toggle(holder, ids[0], codes[0], "kit")
        with holder.transaction():  # kit's other desk is in the middle of changing the same row
            holder._db.execute("UPDATE assignments SET confidence = NULL WHERE coder = 'kit'")
            with pytest.raises(StudyBusy, match="try again"):
                coding.toggle(waiter, ids[0], codes[0], "kit")
        assert coding.toggle(waiter, ids[0], codes[0], "kit") is False  # the retry goes through


def test_a_dropped_connection_loses_nothing_and_the_next_press_reconnects(shared, pg_server):
    address, ids, codes = shared
    with Study.open(address) as study:
        coding.toggle(study, ids[0], codes[0], "kit")
        pid = study._db.raw.info.backend_pid
        with psycopg.connect(pg_server.address(), autocommit=True) as admin:
            admin.execute("SELECT pg_terminate_backend(%s)", (pid,))
        with pytest.raises(WriteFailed, match="lost the connection"):
            coding.toggle(study, ids[1], codes[0], "kit")
        assert coding.toggle(study, ids[1], codes[0], "kit") is True  # the desk's retry
        assert [x.number for x in coding.codes_of(study, ids[0], "kit")] == [codes[0]]


def test_a_repeated_read_in_one_change_is_answered_once_until_the_change_writes(shared):
    address, ids, codes = shared
    query = "SELECT COUNT(*) FROM assignments WHERE coder = ?"
    with Study.open(address) as study, Study.open(address) as other:
        with study.transaction():
            first = study._db.execute(query, ("kit",)).fetchone()[0]
            coding.toggle(other, ids[0], codes[0], "kit")  # another desk commits meanwhile
            assert study._db.execute(query, ("kit",)).fetchone()[0] == first  # the change's own view holds
            study.set_setting("probe", 1)  # the change writes: reads go to the server again
            assert study._db.execute(query, ("kit",)).fetchone()[0] == first + 1
        assert study._db.execute(query, ("kit",)).fetchone()[0] == first + 1  # outside a change: never kept
