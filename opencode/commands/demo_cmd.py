"""`oecode demo`: the whole job on the bundled, invented demo survey."""

from __future__ import annotations

import argparse

from opencode.commands.common import add_verb, progress_line


def register(subparsers: argparse._SubParsersAction) -> None:
    demo = add_verb(subparsers, "demo", "run the whole job on the bundled demo survey",
                    ["oecode demo", "oecode demo --out /tmp/wrenfield"])
    demo.add_argument("--out", default="oecode-demo", help="folder for the demo study and outputs "
                      "(default: ./oecode-demo)")
    demo.set_defaults(handler=run, overwrite=True)  # the demo replaces its own outputs in its folder


def run(args: argparse.Namespace) -> int:
    from opencode.demo_job import run_demo

    outputs = run_demo(args.out, progress=progress_line)
    print(outputs.summary)
    print()
    print("\n".join(outputs.lines))
    print()
    print(f"study file: {outputs.study}")
    for name, path in outputs.files.items():
        print(f"{name}: {path}")
    print()
    print("Machine and rule codes are suggestions until a person accepts them. Open the coding desk with:")
    print(f"  oecode code {outputs.study} --question why --coder YOURNAME")
    return 0
