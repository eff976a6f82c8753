"""`oecode demo`: the whole job on the bundled, invented demo survey."""

from __future__ import annotations

import argparse

from opencode.commands.common import progress_line
from opencode.demo_job import run_demo


def register(subparsers: argparse._SubParsersAction) -> None:
    demo = subparsers.add_parser("demo", help="run the whole job on the bundled demo survey")
    demo.add_argument("--out", default="opencode-demo", help="folder for the demo study and outputs "
                      "(default: ./opencode-demo)")
    demo.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    outputs = run_demo(args.out, progress=progress_line)
    print(outputs.summary)
    print()
    print(f"study file: {outputs.study}")
    for name, path in outputs.files.items():
        print(f"{name}: {path}")
    return 0
