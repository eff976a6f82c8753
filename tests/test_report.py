"""The HTML report: one self-contained file with the study, frames, charts, tables, agreement and extra sections."""

from __future__ import annotations

import base64
import html
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from opencode.analysis.tables import coded_data
from opencode.cli import main
from opencode.analysis.agreement.study import question_agreement
from opencode.errors import OpenCodeError
from opencode.export.report import CAUTIONS, ReportSection, build_report, example_verbatims
from opencode.study.store import Study
from helpers import require_program, MACHINE_SUGGESTIONS, RULE_SUGGESTIONS, build_fixture_study

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
OUTSIDE = re.compile(r"""(?:src|href)\s*=\s*["']?\s*(?:https?:)?//|url\(\s*["']?(?:https?:)?//|@import""", re.I)


@pytest.fixture(scope="module")
def study_path(tmp_path_factory) -> Path:
    return build_fixture_study(tmp_path_factory.mktemp("report"))


@pytest.fixture(scope="module")
def report(study_path, tmp_path_factory) -> tuple[Path, list[str]]:
    """One full report: both questions by coder ash, a banner, agreement ash/bryn on 'why', an extra section."""
    out = tmp_path_factory.mktemp("report-out") / "report.html"
    notes: list[str] = []
    with Study.open(study_path) as study:
        agreement = {"why": question_agreement(study, "why", ["ash", "bryn"], n_resamples=50)}
        build_report(study, out, coder="ash", banner=["age_band"], agreement=agreement, notes=notes,
                     extra_sections=[ReportSection("Drivers of support", "<p id='extra-marker'>drivers here</p>")])
    return out, notes


def test_one_self_contained_file(report):
    path, _ = report
    assert [p.name for p in path.parent.iterdir()] == ["report.html"]  # nothing beside it, no temporary left
    page = path.read_text(encoding="utf-8")
    images = re.findall(r'<img [^>]*src="data:image/png;base64,([A-Za-z0-9+/=]+)"', page)
    assert len(images) == 2  # one chart per question
    assert all(base64.b64decode(data).startswith(PNG_MAGIC) for data in images)
    assert not OUTSIDE.search(page), OUTSIDE.search(page)
    assert "http://" not in page and "https://" not in page
    assert "@media print" in page


def test_report_holds_every_part(report):
    path, notes = report
    page = path.read_text(encoding="utf-8")
    for caution in CAUTIONS:
        assert html.escape(caution) in page
    assert "2,400 respondents" in page and "Closed-ended variables" in page  # study summary
    for title in ("why: Why do you say that?", "improve: What one change would most improve your library?"):
        assert title in page
    assert page.count("code frequencies</h3>") == 2 and page.count("column % by banner</h3>") == 2
    assert "Concerns about the proposal" in page and "Code frame with example verbatims" in page
    assert 'class="oc-agreement"' in page and "Coder agreement on why" in page and "Cohen" in page
    assert "Coder agreement on improve" not in page
    assert "id='extra-marker'" in page and "Drivers of support" in page
    assert any("not yet coded by 'ash'" in n for n in notes)
    assert any("bases under 30" in n for n in notes)


def test_quoted_verbatims_are_masked_by_default(study_path, tmp_path):
    with Study.open(study_path) as study:
        coding = coded_data.load_coding(study, "why")
        raw = example_verbatims(study, coding, per_code=500, mask=False)
        masked = example_verbatims(study, coding, per_code=500)
        out = build_report(study, tmp_path / "r.html", questions=["why"], quotes_per_code=500)
        kept = build_report(study, tmp_path / "raw.html", questions=["why"], quotes_per_code=500, mask_verbatims=False)
    assert any("@" in t for t in raw[97])  # the fixture's e-mail verbatim is quoted under code 97
    assert not any("@" in t for texts in masked.values() for t in texts)
    assert any("[email]" in t for t in masked[97])
    page = out.read_text(encoding="utf-8")
    assert "[email]" in page and not re.search(r"[\w.]+@example\.\w+", page)
    assert re.search(r"[\w.]+@example\.\w+", kept.read_text(encoding="utf-8"))


def test_suggestions_are_stated(study_path, tmp_path):
    notes: list[str] = []
    with Study.open(study_path) as study:
        out = build_report(study, tmp_path / "r.html", questions=["why"], include_suggestions=True, notes=notes)
    said = f"includes {MACHINE_SUGGESTIONS + RULE_SUGGESTIONS} machine/rule suggestions not yet reviewed by a person"
    assert said in out.read_text(encoding="utf-8") and any(said in n for n in notes)


def test_bad_inputs(study_path, tmp_path):
    with Study.open(study_path) as study:
        with pytest.raises(OpenCodeError, match="outside resource"):
            build_report(study, tmp_path / "r.html", extra_sections=[
                ReportSection("x", '<img src="https://example.org/a.png">')])
        with pytest.raises(OpenCodeError, match="does not exist"):
            build_report(study, tmp_path / "missing" / "r.html")
        with pytest.raises(OpenCodeError, match="coder 'nobody'"):
            build_report(study, tmp_path / "r.html", coder="nobody")
    assert not list(tmp_path.iterdir())  # nothing half-written


def test_report_command(study_path, tmp_path, capsys):
    out = tmp_path / "cli.html"
    code = main(["report", str(study_path), "--out", str(out), "--question", "why", "--coder", "ash",
                 "--coders", "ash,bryn", "--banner", "children"])
    printed, err = capsys.readouterr()
    assert code == 0 and f"wrote {out}" in printed and "not yet coded" in err
    assert "Coder agreement on why" in out.read_text(encoding="utf-8")


def test_report_renders_in_headless_chromium(report, tmp_path):
    browser = require_program("chromium", "chromium-browser", "/usr/bin/chromium")
    path, _ = report
    shot = tmp_path / "report.png"
    subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--window-size=1280,2000",
                    f"--screenshot={shot}", path.as_uri()], capture_output=True, timeout=120, check=False)
    data = shot.read_bytes()
    assert data.startswith(PNG_MAGIC) and len(data) > 20_000  # a page with text and charts, not a blank frame
