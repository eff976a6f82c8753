"""The whole job on the bundled demo survey, step by step, without interaction (what `oecode demo` runs).

Import -> lexicon (phrases, a spelling merge) -> themes -> drivers of support -> starter code frames ->
keyword-rule pre-coding -> the double-coded subset -> agreement -> adjudication into `final` -> the machine
coder trained on `final` -> banner tables -> exports -> the HTML report. Every step is a library call that the
matching `oecode` verb makes too.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from opencode.analysis.agreement.study import question_agreement
from opencode.analysis.drivers.study import drivers_chart, drivers_html, question_drivers, remember_choice
from opencode.analysis.tables.study import question_tables, write_tables
from opencode.analysis.themes.study import question_theme_search, themes_html, themes_with_chart
from opencode.analysis.tables.output import format_table
from opencode.coding import adjudication, frame_io, reliability, rules
from opencode.coding import machine_coding
from opencode.coding.import_codes import import_codes
from opencode.errors import OpenCodeError
from opencode.export.report import ReportSection, build_report
from opencode.export.study_export import export_study
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.resources import demo_dir
from opencode.study.store import Study
from opencode.study.summary import format_summary, summarise
from opencode.text import study_text

DEMO_QUESTIONS = ["why", "improve"]
DEMO_CODERS = ["ash", "bryn"]
DEMO_BANNERS = ["support", "age_band", "children"]
DEMO_PHRASES = ["opening hours", "self service", "study space", "panic button", "waiting lists"]
DEMO_MERGES = {"library": ["libary", "liberry"]}
DEMO_K_RANGE = "4:12"
DEMO_OUTCOME = "support"
DEMO_SPLIT = "top2"
#: The accuracy the machine coder must reach in cross-validation before it pre-codes anything.
TARGET_ACCURACY = 0.9
ACTOR = "demo"


@dataclass
class DemoOutputs:
    """Where each output of the demo run is, and what the run printed along the way."""

    folder: Path
    study: Path
    files: dict[str, Path] = field(default_factory=dict)
    summary: str = ""
    lines: list[str] = field(default_factory=list)


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


def _demo_rules() -> dict[str, dict[int, str]]:
    by_question: dict[str, dict[int, str]] = {}
    with open(demo_dir() / "rules.csv", encoding="utf-8", newline="") as handle:
        for row in csv.DictReader(handle):
            by_question.setdefault(row["question"], {})[int(row["code"])] = row["rule"]
    return by_question


def run_demo(folder: str | Path, progress: Callable[[str], None] | None = None) -> DemoOutputs:
    """Run every step on the demo survey into `folder` (created if missing; an earlier demo run is replaced)."""
    say = progress or (lambda message: None)
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OpenCodeError(f"{folder}: exists and is not a folder")
    folder.mkdir(parents=True, exist_ok=True)
    study_path = folder / "wrenfield.study"
    for extra in ("", "-wal", "-shm"):
        Path(str(study_path) + extra).unlink(missing_ok=True)
    outputs = DemoOutputs(folder, study_path)
    say("importing the demo survey (2,400 invented respondents, two open questions)")
    build_demo_study(study_path)
    with Study.open(study_path) as study:
        outputs.summary = format_summary(summarise(study))
        sections = []
        for question in DEMO_QUESTIONS:
            say(f"{question}: lexicon with phrases and a spelling merge")
            study_text.add_phrases(study, question, DEMO_PHRASES, actor=ACTOR)
            for target, sources in DEMO_MERGES.items():
                study_text.add_merge(study, question, sources, target, actor=ACTOR)
        sections += _explore(study, folder, outputs, say)
        agreement = {}
        for question in DEMO_QUESTIONS:
            agreement[question] = _code(study, question, outputs, say)
        say("banner tables, exports and the report")
        _tables(study, folder, outputs)
        _exports(study, folder, outputs)
        notes: list[str] = []
        outputs.files["report"] = build_report(
            study, folder / "report.html", questions=DEMO_QUESTIONS, banner=DEMO_BANNERS, include_suggestions=True,
            agreement=agreement, extra_sections=sections, notes=notes,
            title="Wrenfield library hours consultation (invented demo)")
        outputs.lines += [line for line in (f"note: {note}" for note in dict.fromkeys(notes))
                          if line not in outputs.lines]
    return outputs


def _explore(study: Study, folder: Path, outputs: DemoOutputs, say) -> list[ReportSection]:
    """Themes and drivers before any coding: what people talk about, which words go with support."""
    sections = []
    for question in DEMO_QUESTIONS:
        say(f"{question}: choosing the number of themes (k = {DEMO_K_RANGE}) by coherence and stability")
        search = question_theme_search(study, question, DEMO_K_RANGE, actor=ACTOR)
        k = search.search.recommended_k
        say(f"{question}: {k} themes")
        themes, chart = themes_with_chart(study, question, folder / f"themes-{question}.png", k=k, by="support",
                                          actor=ACTOR)
        outputs.files[f"themes chart ({question})"] = chart
        outputs.lines.append(f"{question}: {k} themes (recommended by coherence and stability; reading them is the "
                             "final test): " + "; ".join(t.label for t in themes.run.themes))
        sections.append(ReportSection(f"Themes in {question}", themes_html(themes, chart),
                                      summary=f"Themes in {question} ({k}): " +
                                      "; ".join(t.label for t in themes.run.themes)))
    say("why: drivers of support (support or strong support against oppose or strong oppose)")
    remember_choice(study, "why", DEMO_OUTCOME, split=DEMO_SPLIT, actor=ACTOR)
    drivers = question_drivers(study, "why", DEMO_OUTCOME, split=DEMO_SPLIT, n_subsamples=20)
    chart = drivers_chart(drivers, folder / "drivers-why.png")[0]
    outputs.files["drivers chart (why)"] = chart
    comparison = drivers.comparisons[0]
    label = dict(zip(comparison.table["term"], comparison.table["label"]))
    sides = [", ".join(label[t] for t in comparison.ranker.top_terms(side, 6)["term"]) for side in (1, 0)]
    outputs.lines.append(f"why: drivers of {DEMO_OUTCOME}: cross-validated AUC {comparison.ranker.cv_auc_:.2f}; "
                         f"{comparison.outcome.labels[1]}: {sides[0]}; {comparison.outcome.labels[0]}: {sides[1]}")
    sections.append(ReportSection(f"Drivers of {DEMO_OUTCOME} in why", drivers_html(drivers, chart, heading=False),
                                  summary=f"Drivers of {DEMO_OUTCOME} in why (cross-validated AUC "
                                  f"{comparison.ranker.cv_auc_:.2f}): {comparison.outcome.labels[1]}: {sides[0]}; "
                                  f"{comparison.outcome.labels[0]}: {sides[1]}"))
    return sections


def _code(study: Study, question: str, outputs: DemoOutputs, say):
    """Frame, rules, the double-coded subset, agreement, adjudication, the machine coder; returns agreement."""
    say(f"{question}: starter code frame and keyword rules")
    frame_io.import_frame(study, question, demo_dir() / f"frame-{question}.csv", actor=ACTOR)
    for number, rule in _demo_rules().get(question, {}).items():
        rules.set_rule(study, question, number, rule, actor=ACTOR)
    suggested = rules.apply_rules(study, question, actor=ACTOR)
    outputs.lines.append(f"{question}: keyword rules suggested {sum(suggested.values()):,} codes for people to confirm")
    say(f"{question}: the double-coded subset by {' and '.join(DEMO_CODERS)}")
    import_codes(study, question, ["codes"], source_path=demo_dir() / "double-coded.csv", id_column="respondent_id",
                 coder_column="coder", question_column="question", layout="long", actor=ACTOR)
    result = question_agreement(study, question, DEMO_CODERS, n_resamples=200, random_state=0)
    kappa = result.frame["mean_kappa"]
    alpha = result.frame["alpha_masi"]
    outputs.lines.append(f"{question}: agreement between {' and '.join(DEMO_CODERS)} on {result.n_pairable} verbatims: "
                         f"{result.headline.verdict} ({result.headline.n_flagged} of {result.headline.n_judged} codes "
                         f"under the bar, special codes left out); mean kappa {_number(kappa)}, alpha (MASI) "
                         f"{_number(alpha)}")
    say(f"{question}: adjudication into the final coder")
    agreed = adjudication.accept_agreed(study, question, DEMO_CODERS, actor=ACTOR)
    differing = adjudication.differences(study, question, DEMO_CODERS)
    for difference in differing:
        adjudication.take_union(study, question, difference.verbatim_id, DEMO_CODERS)
    outputs.lines.append(f"{question}: {agreed} agreed verbatims went to final in one step; {len(differing)} "
                         "differing ones took the union of both coders (a demo shortcut: a lead would review them "
                         "on the compare screen)")
    say(f"{question}: training the machine coder on the final codes")
    machine_coding.train(study, question, coder="final")
    try:
        applied = machine_coding.apply_machine(study, question, target_accuracy=TARGET_ACCURACY, actor=ACTOR)
        outputs.lines.append(f"{question}: the machine coder pre-coded {applied.verbatims:,} of {applied.candidates:,} "
                             f"uncoded verbatims at threshold {applied.threshold:.2f} (cross-validated accuracy "
                             f">= {TARGET_ACCURACY:.0%}); they stay suggestions until a person accepts them")
    except OpenCodeError as error:
        outputs.lines.append(f"{question}: the machine coder pre-coded nothing: {error}")
    return result


def _number(estimate) -> str:
    return "undefined" if estimate.value is None else f"{estimate.value:.2f}"


def _tables(study: Study, folder: Path, outputs: DemoOutputs) -> None:
    made = []
    for question in DEMO_QUESTIONS:
        tables = question_tables(study, question, DEMO_BANNERS, include_suggestions=True)
        made += tables.tables
        outputs.lines += [f"note: {warning}" for warning in tables.warnings]
        outputs.lines += ["", format_table(tables.frequencies), ""]
    outputs.files["banner tables (Excel)"] = write_tables(made, folder / "tables.xlsx")
    outputs.files["banner tables (HTML)"] = write_tables(made, folder / "tables.html")


def _exports(study: Study, folder: Path, outputs: DemoOutputs) -> None:
    for fmt, name in (("sav", "coded.sav"), ("dta", "coded.dta"), ("csv", "coded.csv"), ("sss", "coded.sss")):
        result = export_study(study, folder / name, fmt, questions=DEMO_QUESTIONS, include_suggestions=True,
                              closed=None, verbatims="masked" if fmt == "csv" else "omit")
        outputs.files[f"coded data ({fmt})"] = result.written[0]
