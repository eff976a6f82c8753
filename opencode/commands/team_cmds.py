"""Team verbs: `push` / `pull` (a study between a file and a PostgreSQL server), `team` (who may do what,
and a local server for trying it), `handout` / `merge` (a coder's copy without a server)."""

from __future__ import annotations

import argparse
import getpass
import os

from opencode.commands.common import add_action, add_verb
from opencode.errors import BadInput
from opencode.study.address import is_server_address, parse_address

ADDRESS_HELP = "a server study: postgresql://USER@HOST/DATABASE?study=NAME, or 'service=NAME study=NAME'"


def register(subparsers: argparse._SubParsersAction) -> None:
    push = add_verb(subparsers, "push", "copy a study file into a PostgreSQL server (one schema per study)",
                    ["oecode push wrenfield.study 'service=oecode-local study=wrenfield'"])
    push.add_argument("study", help="the study file (NAME.study)")
    push.add_argument("address", help=ADDRESS_HELP)
    push.add_argument("--replace", action="store_true", help="replace a study of the same name on the server")
    push.set_defaults(handler=run_push)

    pull = add_verb(subparsers, "pull", "copy a study from a PostgreSQL server into a study file",
                    ["oecode pull 'service=oecode-local study=wrenfield' copy.study"])
    pull.add_argument("address", help=ADDRESS_HELP)
    pull.add_argument("file", help="the study file to write (NAME.study)")
    pull.add_argument("--replace", action="store_true", help="overwrite the file if it exists")
    pull.set_defaults(handler=run_pull)

    team = add_verb(subparsers, "team", "coders and leads of a server study; a local server for trying it",
                    ["oecode team server team-pg"])
    actions = team.add_subparsers(dest="action", metavar="ACTION", required=True)
    grant = add_action(actions, "grant", "let people code (--coder) or lead (--lead) a server study",
                       ["oecode team grant 'service=oecode-local study=wrenfield' --coder kit --lead ann "
                        "--ask-password"], study=False)
    grant.add_argument("address", help=ADDRESS_HELP)
    grant.add_argument("--coder", action="append", default=[], help="a coder's name = database user (repeat)")
    grant.add_argument("--lead", action="append", default=[], help="a lead's name = database user (repeat)")
    secret = grant.add_mutually_exclusive_group()
    secret.add_argument("--ask-password", action="store_true",
                        help="set each new member's password, typed at a prompt (never on the command line)")
    secret.add_argument("--password-env", metavar="VAR",
                        help="set the password from this environment variable (for scripts)")
    grant.set_defaults(handler=run_grant)
    revoke = add_action(actions, "revoke", "take a member out of a server study's team (their login stays)",
                        ["oecode team revoke 'service=oecode-local study=wrenfield' kit"], study=False)
    revoke.add_argument("address", help=ADDRESS_HELP)
    revoke.add_argument("name")
    revoke.set_defaults(handler=run_revoke)
    members = add_action(actions, "list", "the leads and coders of a server study",
                         ["oecode team list 'service=oecode-local study=wrenfield'"], study=False)
    members.add_argument("address", help=ADDRESS_HELP)
    members.set_defaults(handler=run_list)
    server = add_action(actions, "server", "start a throwaway PostgreSQL server in a folder, for trying team work "
                        "on one machine (not for real data)",
                        ["oecode team server team-pg", "oecode team server team-pg --stop"], study=False)
    server.add_argument("folder")
    server.add_argument("--port", type=int, help="TCP port on 127.0.0.1 (default: a free one)")
    server.add_argument("--run-as", metavar="USER", help="start it as this account (needed when you are root)")
    server.add_argument("--stop", action="store_true", help="stop the server started in the folder")
    server.set_defaults(handler=run_server)

    handout = add_verb(subparsers, "handout", "give a coder a copy of the study to code without a server",
                       ["oecode handout wrenfield.study --coder kit --out kit.study"])
    handout.add_argument("study", help="the study (file or server address)")
    handout.add_argument("--coder", required=True, help="the coder the copy is for")
    handout.add_argument("--out", required=True, help="the copy to write (NAME.study)")
    handout.add_argument("--replace", action="store_true", help="overwrite the copy if it exists")
    handout.set_defaults(handler=run_handout)

    merge = add_verb(subparsers, "merge", "bring a coder's copy (from handout) back into the study",
                     ["oecode merge wrenfield.study kit.study"])
    merge.add_argument("study", help="the study (file or server address)")
    merge.add_argument("copy", help="the coder's copy (NAME.study)")
    merge.set_defaults(handler=run_merge)


def _server_address(text: str):
    if not is_server_address(text):
        raise BadInput(f"{text}: not a server address ({ADDRESS_HELP})")
    return parse_address(text)


def run_push(args: argparse.Namespace) -> int:
    from opencode.study.transfer import push

    address = _server_address(args.address)
    copied = push(args.study, address, replace=args.replace)
    print(f"pushed {args.study} to {address}: {sum(copied.values()):,} rows in {len(copied)} tables "
          f"({copied.get('assignments', 0):,} assignments, {copied.get('audit', 0):,} audit rows)")
    return 0


def run_pull(args: argparse.Namespace) -> int:
    from opencode.study.transfer import pull

    address = _server_address(args.address)
    copied = pull(address, args.file, overwrite=args.replace)
    print(f"pulled {address} into {args.file}: {sum(copied.values()):,} rows in {len(copied)} tables")
    return 0


def _password(args: argparse.Namespace, name: str) -> str | None:
    if args.password_env:
        value = os.environ.get(args.password_env)
        if not value:
            raise BadInput(f"--password-env {args.password_env}: the environment variable is not set")
        return value
    if args.ask_password:
        first = getpass.getpass(f"password for {name}: ")
        if first != getpass.getpass(f"again, for {name}: "):
            raise BadInput(f"{name}: the two passwords differ; nothing was changed for {name}")
        return first or None
    return None


def run_grant(args: argparse.Namespace) -> int:
    from opencode.study import team
    from opencode.study.store import Study

    if not args.coder and not args.lead:
        raise BadInput("name at least one --coder or --lead")
    with Study.open(_server_address(args.address)) as study:
        for role, names in (("lead", args.lead), ("coder", args.coder)):
            for name in names:
                new = team.grant(study, name, role, password=_password(args, name))
                print(f"{name}: {role} of {study.path.name}" + ("" if new else " (already)"))
    return 0


def run_revoke(args: argparse.Namespace) -> int:
    from opencode.study import team
    from opencode.study.store import Study

    with Study.open(_server_address(args.address)) as study:
        removed = team.revoke(study, args.name)
    print(f"{args.name}: " + ("no longer in the team" if removed else "was not in the team"))
    return 0


def run_list(args: argparse.Namespace) -> int:
    from opencode.study import team
    from opencode.study.store import Study

    with Study.open(_server_address(args.address)) as study:
        found = team.members(study)
    print("leads:  " + (", ".join(found.leads) or "(none)"))
    print("coders: " + (", ".join(found.coders) or "(none)"))
    return 0


def run_server(args: argparse.Namespace) -> int:
    from opencode.study import pg_local

    if args.stop:
        pg_local.stop_local_server(args.folder, run_as=args.run_as)
        print(f"stopped the server in {args.folder}")
        return 0
    server = pg_local.start_local_server(args.folder, port=args.port, run_as=args.run_as)
    print(f"a local server runs from {server.folder} (stop it with: oecode team server {args.folder} --stop)")
    print(f"its database: {server.address()}")
    print(f"or by service name, after: export PGSERVICEFILE={server.folder / 'pg_service.conf'}")
    print(f"push a study:  oecode push NAME.study 'service={pg_local.SERVICE} study=NAME'")
    return 0


def run_handout(args: argparse.Namespace) -> int:
    from opencode.coding.handout import handout
    from opencode.study.store import Study

    with Study.open(args.study) as study:
        report = handout(study, args.coder, args.out, actor=getpass.getuser(), overwrite=args.replace)
    hidden = report.removed.get("blind codes", 0)
    suggested = report.removed.get("blind suggestions", 0)
    print(f"wrote {report.path} for {report.coder}: {report.assignments:,} of their codes"
          + (f"; {hidden:,} other coders' codes on their blind sample left out" if hidden else "")
          + (f"; {suggested:,} rule/machine suggestions on their blind sample left out" if suggested else ""))
    if report.removed.get("models"):
        print(f"{report.removed['models']:,} stored machine-coder models left out (they learned from every "
              f"coder's codes, blind ones included); {report.coder} can train one in the copy")
    print(f"they code it with: oecode code {report.path} --question QUESTION --coder {report.coder}")
    return 0


def run_merge(args: argparse.Namespace) -> int:
    from opencode.coding.handout import format_merge, merge
    from opencode.study.store import Study

    with Study.open(args.study) as study:
        report = merge(study, args.copy)
    print(format_merge(report))
    return 0
