"""`oecode code STUDY --question Q --coder NAME`: open the terminal coding desk."""

from __future__ import annotations

import argparse

from opencode.commands.common import add_verb


def register(subparsers: argparse._SubParsersAction) -> None:
    code = add_verb(subparsers, "code", "code verbatims at the terminal desk (keys: F1 inside)",
                    ["oecode code survey.study --question why --coder ash",
                     "oecode code survey.study --question why --coder ash --screen themes"])
    code.add_argument("study", help="the study file (NAME.study)")
    code.add_argument("--question", required=True, help="the open question to code")
    code.add_argument("--coder", required=True, help="your coder name (e.g. initials); codes are kept per coder")
    code.add_argument("--refresh", type=float, default=30.0, metavar="SECONDS",
                      help="how often to show other coders' changes (0: only on Ctrl+R; default 30)")
    code.add_argument("--screen", choices=("desk", "frame", "terms", "themes", "compare"), default="desk",
                      help="the screen to open on (default: desk)")
    code.set_defaults(handler=run_code)


def run_code(args: argparse.Namespace) -> int:
    from opencode.study.team import check_coder_identity
    from opencode.tui.app import DeskApp
    from opencode.tui.session import DeskSession

    session = DeskSession(args.study, args.question, args.coder)
    try:  # on a server, a coder codes under their own database user name only
        check_coder_identity(session.study, session.coder)
    except BaseException:
        session.close()
        raise
    app = DeskApp(session, refresh_seconds=max(args.refresh, 0.0), first_screen=args.screen)
    app.run()
    return int(app.return_code or 0)
