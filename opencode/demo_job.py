"""The whole job on the bundled demo survey, step by step, without interaction (what `oecode demo` runs)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.resources import demo_dir
from opencode.study.store import Study
from opencode.study.summary import format_summary, summarise

DEMO_QUESTIONS = ["why", "improve"]


@dataclass
class DemoOutputs:
    """Where each output of the demo run is."""

    folder: Path
    study: Path
    files: dict[str, Path] = field(default_factory=dict)
    summary: str = ""


def demo_import_options(source: str = "csv") -> ImportOptions:
    """How the demo survey is read: the CSV with its data map, or the .sav carrying its own labels."""
    labels = demo_dir() / "wrenfield-labels.csv" if source == "csv" else None
    return ImportOptions("resp_id", list(DEMO_QUESTIONS), labels_file=labels, weight="weight",
                         roles={"support": "outcome"})


def build_demo_study(target: Path, source: str = "csv") -> Path:
    """Import the bundled demo survey (from its CSV or its .sav) into a new study at `target`."""
    data = demo_dir() / ("wrenfield.csv" if source == "csv" else "wrenfield.sav")
    import_survey(target, data, demo_import_options(source))
    return target


def run_demo(folder: str | Path, progress: Callable[[str], None] | None = None) -> DemoOutputs:
    """Run every step on the demo survey into `folder` (created if missing; an earlier demo study is replaced)."""
    say = progress or (lambda message: None)
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OpenCodeError(f"{folder}: exists and is not a folder")
    folder.mkdir(parents=True, exist_ok=True)
    study_path = folder / "wrenfield.study"
    for extra in ("", "-wal", "-shm"):
        Path(str(study_path) + extra).unlink(missing_ok=True)
    say("importing the demo survey (2,400 respondents, two open questions)")
    build_demo_study(study_path)
    outputs = DemoOutputs(folder, study_path)
    with Study.open(study_path) as study:
        outputs.summary = format_summary(summarise(study))
    return outputs
