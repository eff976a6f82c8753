"""Who may do what on a server study: each forbidden action, tried with the coder's own connection, is refused.

The refusals come from the server (grants and row-level security policies in opencode/study/team.py), so
they are tried twice where it matters: through the library, as the desk would, and with hand-written SQL on
a plain psycopg connection logged in as the coder, as anyone with a SQL client could.
"""

from __future__ import annotations

import numpy as np
import psycopg
import pytest

from opencode.cli import main
from opencode.coding import assignments as coding
from opencode.coding import frames, history, machine_coding, reliability
from opencode.coding.adjudication import take
from opencode.errors import BadInput, NotPermitted
from opencode.study import desk_queries as dq
from opencode.study import survey_data, team
from opencode.study.store import Study
from opencode.study.transfer import push
from team_server import study_name


@pytest.fixture(scope="module")
def team_study(pg_server, demo_base):
    """The double-coded demo (ash, bryn) on the server; kit and bryn coders, ann lead; sample 'blind' for kit, bryn."""
    name = study_name("roles")
    push(demo_base, pg_server.address(study=name))
    owner = pg_server.address(study=name)
    assert main(["team", "grant", owner, "--coder", "kit", "--coder", "bryn", "--lead", "ann"]) == 0
    with Study.open(owner) as study:
        reliability.draw_sample(study, "why", "blind", n=40, random_state=3, actor="ann")
        reliability.assign_sample(study, "why", "blind", ["kit", "bryn"])
    return name


def as_user(pg_server, name: str, user: str) -> Study:
    return Study.open(pg_server.address(study=name, user=user))


def sql_as(pg_server, name: str, user: str) -> psycopg.Connection:
    """A hand-written-SQL client logged in as `user`, the study's schema first on its path."""
    connection = psycopg.connect(pg_server.address(user=user), autocommit=True)
    connection.execute(f'SET search_path TO "{name}"')
    return connection


@pytest.fixture(scope="module")
def places(pg_server, team_study):
    """(a blind sample verbatim bryn coded, a verbatim outside the sample bryn coded, a code number), as the
    owner sees them (a coder's own connection could not even find the first)."""
    with Study.open(pg_server.address(study=team_study)) as study:
        blind = set(reliability.blind_verbatim_ids(study, "why", "kit").tolist())
        table = coding.assignments(study, "why", ["bryn"])
    inside = int(table[table["verbatim_id"].isin(blind)]["verbatim_id"].iloc[0])
    outside = table[~table["verbatim_id"].isin(blind)]
    return inside, int(outside["verbatim_id"].iloc[0]), int(outside["number"].iloc[0])


def test_team_list_and_roles(pg_server, team_study, capsys):
    owner = pg_server.address(study=team_study)
    assert main(["team", "list", owner]) == 0
    printed = capsys.readouterr().out
    assert "leads:  ann" in printed and "coders: bryn, kit" in printed
    for user, role in (("kit", "coder"), ("ann", "lead"), ("oecode", "owner")):
        with as_user(pg_server, team_study, user) as study:
            assert team.role_of(study) == role


def test_a_coder_writes_own_codes_notes_marks_and_undoes_them(pg_server, team_study, places):
    with as_user(pg_server, team_study, "kit") as study:
        _, outside, number = places
        assert coding.toggle(study, outside, number, "kit") is True
        assert coding.mark_done(study, outside, "kit") and coding.set_note(study, outside, "kit", "unsure")
        assert history.undo(study, "kit") == "note"
        assert history.redo(study, "kit") == "note"
        assert [c.number for c in coding.codes_of(study, outside, "kit")] == [number]
        assert coding.note_of(study, outside, "kit") == "unsure"


def test_a_coder_cannot_write_another_coders_codes(pg_server, team_study, places):
    with as_user(pg_server, team_study, "kit") as study:
        _, outside, _ = places
        held = {c.number for c in coding.codes_of(study, outside, "bryn")}
        spare = next(c.number for c in frames.load_frame(study, "why").codes
                     if not c.is_net and c.active and c.number not in held)
        for coder in ("bryn", "final"):
            with pytest.raises(NotPermitted, match="kit may not"):
                coding.assign(study, outside, spare, coder)
        for number in held:  # taking bryn's codes off is refused just the same
            with pytest.raises(NotPermitted, match="kit may not"):
                coding.unassign(study, outside, number, "bryn")
        with pytest.raises(NotPermitted):
            coding.set_note(study, outside, "bryn", "bryn's note, written by kit")
        with pytest.raises(NotPermitted):  # setting or clearing bryn's done mark, whichever would change it
            coding.mark_done(study, outside, "bryn", done=not coding.is_done(study, outside, "bryn"))
        with pytest.raises(NotPermitted):
            take(study, "why", outside, "bryn")  # adjudication writes the final coder: the lead's job


def test_hand_written_sql_gets_the_same_refusals(pg_server, team_study, places):
    inside, outside, _ = places
    with as_user(pg_server, team_study, "bryn") as bryn:  # a note of bryn's for kit to try to touch
        coding.set_note(bryn, outside, "bryn", "bryn's own note")
    marks = "SELECT verbatim_id, coder, marked_at FROM coded_marks ORDER BY verbatim_id, coder"
    with Study.open(pg_server.address(study=team_study)) as lead:
        before = coding.assignments(lead, "why", ["ash", "bryn"])
    with sql_as(pg_server, team_study, pg_server.superuser) as owner:
        marks_before = owner.execute(marks).fetchall()
    kit = sql_as(pg_server, team_study, "kit")
    try:
        code_id = kit.execute("SELECT code_id FROM assignments WHERE coder = 'bryn' AND verbatim_id = %s",
                              (outside,)).fetchone()[0]
        with pytest.raises(psycopg.errors.InsufficientPrivilege, match="row-level security"):
            kit.execute("INSERT INTO assignments (verbatim_id, code_id, coder, source, created_at) "
                        "VALUES (%s, %s, 'bryn', 'hand', 'now')", (outside, code_id))
        with pytest.raises(psycopg.errors.InsufficientPrivilege, match="row-level security"):
            kit.execute("INSERT INTO audit (at, actor, action, entity) VALUES ('now', 'ash', 'assign', 'verbatim')")
        # another coder's rows are not the coder's to update or delete: refused out loud, not 0 rows quietly
        for statement in ("UPDATE assignments SET coder = 'kit' WHERE coder = 'bryn'",
                          "UPDATE assignments SET confidence = 0.5 WHERE coder = 'bryn'",
                          "DELETE FROM assignments WHERE coder IN ('ash', 'bryn')",
                          f"DELETE FROM assignments WHERE coder = 'bryn' AND verbatim_id = {outside}",
                          "UPDATE coded_marks SET marked_at = 'x' WHERE coder = 'ash'",
                          "UPDATE coded_marks SET coder = 'kit' WHERE coder = 'ash'",
                          "DELETE FROM coded_marks WHERE coder = 'ash'",
                          "DELETE FROM coded_marks",
                          "UPDATE notes SET text = 'kit was here' WHERE coder = 'bryn'",
                          "DELETE FROM notes WHERE coder = 'bryn'"):
            with pytest.raises(psycopg.errors.InsufficientPrivilege, match=r"kit may not (update|delete) \w+'s rows"):
                kit.execute(statement)
        # rows the coder cannot read stay silent (refusing would tell them the rows exist): others' audit rows,
        # and other coders' codes on the coder's blind sample
        assert kit.execute("UPDATE audit SET undone = 1 WHERE actor <> 'kit'").rowcount == 0
        assert kit.execute("DELETE FROM assignments WHERE coder = 'bryn' AND verbatim_id = %s",
                           (inside,)).rowcount == 0
        # the coder's own rows are theirs to change
        kit.execute("INSERT INTO notes (verbatim_id, coder, text, updated_at) VALUES (%s, 'kit', 'mine', 'now') "
                    "ON CONFLICT (verbatim_id, coder) DO NOTHING", (outside,))
        assert kit.execute("UPDATE notes SET text = 'still mine' WHERE coder = 'kit'").rowcount == 1
        assert kit.execute("DELETE FROM notes WHERE coder = 'kit'").rowcount == 1
        for statement in ("UPDATE audit SET payload = '{}' WHERE actor = 'kit'",     # only `undone` is writable
                          "UPDATE codes SET label = 'renamed by kit'",
                          "INSERT INTO frames (name) VALUES ('kit''s frame')",
                          "DELETE FROM samples",
                          "INSERT INTO sample_coders (sample_id, coder) SELECT id, 'kit' FROM samples",
                          "UPDATE settings SET value = '1'",
                          "INSERT INTO settings (key, value) VALUES ('x', '1')",
                          "TRUNCATE assignments",
                          "DROP TABLE assignments",
                          "ALTER TABLE assignments DISABLE ROW LEVEL SECURITY"):
            with pytest.raises((psycopg.errors.InsufficientPrivilege, psycopg.errors.WrongObjectType)):
                kit.execute(statement)
    finally:
        kit.close()
    with Study.open(pg_server.address(study=team_study)) as lead:
        after = coding.assignments(lead, "why", ["ash", "bryn"])
        assert coding.note_of(lead, outside, "bryn") == "bryn's own note"
    with sql_as(pg_server, team_study, pg_server.superuser) as owner:
        assert owner.execute(marks).fetchall() == marks_before
    assert after.equals(before)


def test_the_lead_and_the_owner_still_change_anyones_rows_by_hand(pg_server, team_study, places):
    _, outside, number = places
    with as_user(pg_server, team_study, "bryn") as bryn:
        coding.set_note(bryn, outside, "bryn", "to be tidied by the lead")
    for user in ("ann", pg_server.superuser):  # the lead, then the schema's owner
        client = sql_as(pg_server, team_study, user)
        try:
            assert client.execute("UPDATE notes SET text = %s WHERE coder = 'bryn' AND verbatim_id = %s",
                                  (f"tidied by {user}", outside)).rowcount == 1
        finally:
            client.close()
    with as_user(pg_server, team_study, "ann") as lead:
        assert coding.note_of(lead, outside, "bryn") == f"tidied by {pg_server.superuser}"


def test_a_coder_cannot_change_the_frame_samples_or_settings(pg_server, team_study):
    with as_user(pg_server, team_study, "kit") as study:
        with pytest.raises(NotPermitted):
            frames.add_code(study, "why", "Added by a coder", actor="kit")
        with pytest.raises(NotPermitted):
            frames.edit_code(study, "why", 1, actor="kit", label="Relabelled by a coder")
        with pytest.raises(NotPermitted):
            reliability.draw_sample(study, "why", "kits-own", n=10, actor="kit")
        with pytest.raises(NotPermitted):
            reliability.assign_sample(study, "why", "blind", ["kit", "zed"])
        with pytest.raises(NotPermitted):
            study.set_setting("desk.confidence", 0.2, actor="kit")
        assert frames.get_code(study, "why", 1).label != "Relabelled by a coder"


def test_blind_sample_codes_stay_hidden_from_the_coder(pg_server, team_study, places):
    with Study.open(pg_server.address(study=team_study)) as lead:
        inside, outside, _ = places
        assert dq.other_coders_codes(lead, inside, "kit")  # the lead sees bryn's (and ash's) codes there
    with as_user(pg_server, team_study, "kit") as study:
        assert dq.other_coders_codes(study, inside, "kit") == []
        assert dq.other_coders_codes(study, outside, "kit")  # outside the sample the team's codes are visible
        blind = reliability.blind_verbatim_ids(study, "why", "kit")
        table = coding.assignments(study, "why", ["ash", "bryn"])
        assert not np.isin(table["verbatim_id"], blind).any() and len(table) > 0
    kit = sql_as(pg_server, team_study, "kit")
    try:
        hidden = kit.execute(
            "SELECT COUNT(*) FROM assignments a JOIN sample_items si ON si.verbatim_id = a.verbatim_id "
            "WHERE a.coder <> 'kit'").fetchone()[0]
        assert hidden == 0
        assert kit.execute("SELECT COUNT(*) FROM audit WHERE actor <> 'kit'").fetchone()[0] == 0
    finally:
        kit.close()
    bryn = sql_as(pg_server, team_study, "bryn")
    try:  # bryn's own codes on the same verbatims are bryn's to read
        assert bryn.execute("SELECT COUNT(*) FROM assignments a JOIN sample_items si ON si.verbatim_id = "
                            "a.verbatim_id WHERE a.coder = 'bryn'").fetchone()[0] > 0
    finally:
        bryn.close()


def test_the_lead_adjudicates_and_edits_the_frame_while_coders_work(pg_server, team_study, places):
    with as_user(pg_server, team_study, "ann") as lead, as_user(pg_server, team_study, "bryn") as coder:
        inside, outside, number = places
        taken = take(lead, "why", outside, "bryn")
        assert coding.codes_of(lead, outside, "final") and taken
        code = frames.add_code(lead, "why", "Added by the lead", actor="ann")
        coding.toggle(coder, outside, code.number, "bryn")  # the new code is there for the coder at once
        assert code.number in [c.number for c in coding.codes_of(lead, outside, "bryn")]


def test_a_coder_cannot_copy_the_whole_study(pg_server, team_study, tmp_path, capsys):
    assert main(["pull", pg_server.address(study=team_study, user="kit"), str(tmp_path / "all.study")]) == 1
    assert "only the study's lead" in capsys.readouterr().err and not (tmp_path / "all.study").exists()


def test_grant_refuses_what_it_cannot_do(pg_server, team_study, demo_copy, capsys):
    owner = pg_server.address(study=team_study)
    assert main(["team", "grant", owner, "--coder", "final"]) == 1
    assert "adjudicated" in capsys.readouterr().err
    assert main(["team", "grant", owner, "--coder", "Kit; DROP"]) == 1
    assert "database user name" in capsys.readouterr().err
    assert main(["team", "grant", str(demo_copy), "--coder", "kit"]) == 1
    assert "not a server address" in capsys.readouterr().err
    with Study.open(demo_copy) as study, pytest.raises(BadInput, match="handout"):
        team.grant(study, "kit", "coder")
    # a coder may not hand out roles
    assert main(["team", "grant", pg_server.address(study=team_study, user="kit"), "--coder", "zed"]) == 1
    assert "kit may not" in capsys.readouterr().err


def test_a_password_set_by_grant_works_from_a_password_file_never_the_command_line(pg_server, team_study, tmp_path,
                                                                                monkeypatch, capsys):
    owner = pg_server.address(study=team_study)
    monkeypatch.setenv("NEW_MEMBER_PASSWORD", "correct horse")
    assert main(["team", "grant", owner, "--coder", "remy", "--password-env", "NEW_MEMBER_PASSWORD"]) == 0
    capsys.readouterr()
    with psycopg.connect(owner.split("?")[0] + f"?host={pg_server.socket_dir}&port={pg_server.port}") as admin:
        logged = admin.execute("SELECT rolpassword FROM pg_authid WHERE rolname = 'remy'").fetchone()[0]
    assert logged.startswith("SCRAM-SHA-256$") and "correct horse" not in logged  # hashed before it left
    monkeypatch.delenv("NEW_MEMBER_PASSWORD")
    monkeypatch.delenv("PGPASSWORD", raising=False)
    over_tcp = pg_server.tcp_address(study=team_study, user="remy")
    monkeypatch.setenv("PGPASSFILE", str(tmp_path / "absent"))
    assert main(["info", over_tcp]) == 1
    assert "password" in capsys.readouterr().err
    passfile = tmp_path / "pgpass"
    passfile.write_text(f"127.0.0.1:{pg_server.port}:oecode:remy:correct horse\n", encoding="utf-8")
    passfile.chmod(0o600)
    monkeypatch.setenv("PGPASSFILE", str(passfile))
    assert main(["info", over_tcp]) == 0
    assert "respondents" in capsys.readouterr().out


def test_the_desk_refuses_a_coder_name_other_than_the_login(pg_server, team_study, capsys):
    kit = pg_server.address(study=team_study, user="kit")
    assert main(["code", kit, "--question", "why", "--coder", "bryn"]) == 1
    assert "connected as kit" in capsys.readouterr().err
    with psycopg.connect(pg_server.address(), autocommit=True) as admin:
        admin.execute("DO $$ BEGIN CREATE ROLE zed LOGIN; EXCEPTION WHEN duplicate_object THEN NULL; END $$")
    assert main(["code", pg_server.address(study=team_study, user="zed"), "--question", "why", "--coder", "zed"]) == 1
    assert "zed is not in this study's team" in capsys.readouterr().err


def test_the_machine_coder_is_the_leads(pg_server, team_study, places, capsys):
    """A model learned from every coder's codes, the blind sample's too (running it would reproduce them), so
    coders cannot read `models` (as handouts leave them out); the lead trains and applies. Kept last in the
    module: it files machine suggestions under `final`."""
    inside, outside, _ = places
    with as_user(pg_server, team_study, "ann") as lead:
        trained = machine_coding.train(lead, "why")
        report = machine_coding.apply_machine(lead, "why", threshold=0.5)
        assert report.verbatims > 0
        machine = coding.assignments(lead, "why", ["final"], sources=("machine",))
        blind = set(reliability.blind_verbatim_ids(lead, "why", "kit").tolist())
    assert main(["model", "report", pg_server.address(study=team_study, user="ann"), "--question", "why"]) == 0
    assert f"trained on {len(trained.train_ids):,} hand-coded verbatims" in capsys.readouterr().out
    on_blind = sorted(set(machine["verbatim_id"]) & blind)
    outside_blind = sorted(set(machine["verbatim_id"]) - blind)
    assert on_blind and outside_blind

    for user in ("kit", "bryn"):  # a hand-written SQL client: refused, whatever it asks of the table
        client = sql_as(pg_server, team_study, user)
        try:
            for statement in ("SELECT COUNT(*) FROM models", "SELECT meta, arrays FROM models",
                              "SELECT meta FROM models WHERE id = (SELECT MAX(id) FROM models)"):
                with pytest.raises(psycopg.errors.InsufficientPrivilege, match="permission denied for table models"):
                    client.execute(statement)
        finally:
            client.close()
    ann = sql_as(pg_server, team_study, "ann")
    try:
        assert ann.execute("SELECT COUNT(*) FROM models").fetchone()[0] >= 1
    finally:
        ann.close()

    kit_address = pg_server.address(study=team_study, user="kit")
    with Study.open(kit_address) as kit:  # through the library: one clear line, before any work
        for attempt in (lambda: machine_coding.load_model(kit, "why"), lambda: machine_coding.train(kit, "why"),
                        lambda: machine_coding.suggest_one(kit, outside),
                        lambda: machine_coding.second_look_queue(kit, "why", "bryn")):
            with pytest.raises(NotPermitted, match="only a lead can run the machine coder on a server study"):
                attempt()
        # the suggestions the lead's run stored are the question's: kit sees them outside the blind sample only
        assert all(coding.question_suggestions(kit, v, "kit") == [] for v in on_blind)
        assert any(coding.question_suggestions(kit, v, "kit") for v in outside_blind)
    for action in ("report", "train", "curve", "suggest", "apply", "queue"):
        extra = ["--threshold", "0.9"] if action == "apply" else []
        assert main(["model", action, kit_address, "--question", "why", *extra]) == 1
        err = capsys.readouterr().err.strip()
        assert "only a lead can run the machine coder on a server study" in err and "\n" not in err, (action, err)


def test_grant_takes_models_from_coders_of_an_existing_study(pg_server, team_study):
    """A study set up before coders lost `models` (they held SELECT on every table): the next grant takes it."""
    with Study.open(pg_server.address(study=team_study)) as owner:
        _, coder_group = team.group_roles(owner)
    with psycopg.connect(pg_server.address(), autocommit=True) as admin:
        admin.execute(f'GRANT SELECT ON "{team_study}".models TO "{coder_group}"')
    kit = sql_as(pg_server, team_study, "kit")
    try:
        kit.execute("SELECT COUNT(*) FROM models")  # readable, as before
        assert main(["team", "grant", pg_server.address(study=team_study), "--coder", "kit"]) == 0
        with pytest.raises(psycopg.errors.InsufficientPrivilege, match="permission denied for table models"):
            kit.execute("SELECT COUNT(*) FROM models")
    finally:
        kit.close()
