"""The HTML report: one self-contained file that opens on one screen of summary (bases, top codes, agreement per
code against a bar, themes and drivers in a line each), with every long part collapsible, no table wider than
the page, and charts whose labels stay inside them; checked in headless Chromium at 1280 and 800 pixels."""

from __future__ import annotations

import base64
import html
import json
import re
import shutil
import struct
import subprocess
from pathlib import Path

import numpy as np

import pytest

from opencode.analysis.tables import coded_data
from opencode.cli import main
from opencode.analysis.agreement.study import question_agreement
from opencode.errors import OpenCodeError
from opencode.analysis.tables.study import coding_tables
from opencode.export.report import (AGREEMENT_BAR, BANNER_COLUMNS, CAUTIONS, ReportSection, _banner_parts,
                                    build_report, example_verbatims)
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
        build_report(study, out, coder="ash", banner=["age_band", "support"], agreement=agreement, notes=notes,
                     extra_sections=[ReportSection("Drivers of support", "<p id='extra-marker'>drivers here</p>",
                                                   summary="Drivers of support in why: staff, night against study")])
    return out, notes


@pytest.fixture(scope="module")
def agreement_why(study_path):
    with Study.open(study_path) as study:
        return question_agreement(study, "why", ["ash", "bryn"], n_resamples=50)


def test_one_self_contained_file(report):
    path, _ = report
    assert [p.name for p in path.parent.iterdir()] == ["report.html"]  # nothing beside it, no temporary left
    page = path.read_text(encoding="utf-8")
    images = re.findall(r'<img [^>]*src="data:image/png;base64,([A-Za-z0-9+/=]+)"', page)
    assert len(images) == 5  # top codes and all codes per question, and why's agreement chart
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
    assert page.count("code frequencies</h3>") == 2 and page.count("column % by banner</h3>") >= 4
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


def test_the_report_opens_on_a_summary_and_folds_the_detail(report, agreement_why):
    path, _ = report
    page = path.read_text(encoding="utf-8")
    summary = page[page.index('<section class="oc-summary"'):page.index("</section>", page.index('class="oc-summary"'))]
    assert page.index('class="oc-summary"') < page.index("Cautions") < page.index('class="oc-question"')
    assert "<strong>2,400</strong> respondents" in summary
    assert "<strong>why</strong>" in summary and "<strong>improve</strong>" in summary and "non-answers" in summary
    assert summary.count("<img") == 3  # top codes of both questions, agreement on why
    assert "Drivers of support in why: staff, night against study" in summary
    # the codes under the bar, named in words beside the chart (not by colour alone), least reliable first: the
    # agreement library's flags (the low end of each interval against the bars), special codes left out
    under = [s.code for s in agreement_why.standings if s.flagged and s.in_headline]
    assert under, "the fixture's double coding has codes under the bar"
    lows = [s.kappa.low for s in agreement_why.standings if s.code in under]
    assert lows == sorted(lows)
    assert all(s.kappa.low < AGREEMENT_BAR or s.alpha.low < agreement_why.alpha_bar
               for s in agreement_why.standings if s.code in under)
    flagged = re.search(r'<p class="oc-flag">(.*?)</p>', summary).group(1)
    assert [int(n) for n in re.findall(r"(?:: |; )(\d+) ", flagged)] == under
    alt = re.search(r'alt="Chart: Cohen&#x27;s kappa per code[^"]*"', summary).group(0)
    assert all(f"{code} " in alt for code in under)
    question = page[page.index('class="oc-question"'):]
    assert question.count("<details") >= 8  # frequencies, frame, banner tables, agreement: folded away
    assert "Code frame with example verbatims</summary>" in question


def test_wide_banners_split_into_tables_that_fit(study_path):
    with Study.open(study_path) as study:
        coding = coded_data.load_coding(study, "why", "ash")
        banners = [coded_data.banner_variable(study, name) for name in ("age_band", "support")]
        table = coding_tables(coding, banners, None).banner
    parts = _banner_parts(table)
    assert all(len(part.columns) <= BANNER_COLUMNS for part in parts)
    assert len(parts) > len(table.variables)  # at least one banner needed more than one table
    for part in parts:  # every column keeps its figures and letters (common practice: letters name same-variable columns)
        for j, column in enumerate(part.columns):
            i = table.columns.index(column)
            assert np.array_equal(part.column_share[:, j], table.column_share[:, i], equal_nan=True)
            assert (part.letters()[:, j] != "").sum() <= (table.letters()[:, i] != "").sum()
    shown = {(c.variable, c.label) for part in parts for c in part.columns}
    assert shown == {(c.variable, c.label) for c in table.columns}


def test_charts_keep_their_labels_inside():
    from opencode.export.report_charts import agreement_chart_png, labelled_bars_png

    long = "A very long code label that would be cut at the edge of a figure if it were not wrapped"
    for png in (labelled_bars_png([long, "short"], [40.0, 3.0]),
                agreement_chart_png([long, "2 short", "3 none"], [0.4, 0.9, None], [0.2, 0.8, None],
                                    [0.6, 1.0, None], 0.61, "Cohen's kappa")):
        assert png.startswith(PNG_MAGIC)
        width, height = struct.unpack(">II", png[16:24])
        assert 300 < width < 1000 and height > 100  # saved around everything drawn (tight box), not cut


CHECK_SCRIPT = """<script>
window.addEventListener('load', function () {
  document.querySelectorAll('details').forEach(function (d) { d.open = true; });
  var root = document.documentElement, images = Array.prototype.slice.call(document.images), wide = [];
  document.querySelectorAll('body *').forEach(function (e) {
    var r = e.getBoundingClientRect();
    if (r.right > root.clientWidth + 1) wide.push(e.tagName + '.' + e.className);
    if (e.clientWidth > 0 && e.scrollWidth > e.clientWidth + 1 && getComputedStyle(e).overflowX !== 'visible')
      wide.push('scrolls: ' + e.tagName + '.' + e.className);
  });
  var pre = document.createElement('pre');
  pre.id = 'oc-check';
  pre.textContent = JSON.stringify({scrollWidth: root.scrollWidth, clientWidth: root.clientWidth,
    images: images.length, loaded: images.filter(function (i) { return i.complete && i.naturalWidth > 0; }).length,
    wide: wide.slice(0, 10)});
  document.body.appendChild(pre);
});
</script>"""


def chromium(browser: str, folder: Path, *args: str) -> subprocess.CompletedProcess:
    # flags for a container without a display or a sandbox; a fresh profile each time
    return subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                           "--no-first-run", f"--user-data-dir={folder}", *args], capture_output=True, text=True,
                          timeout=180, check=False)


def test_report_fits_800_and_1280_pixels_in_headless_chromium(report, tmp_path):
    browser = require_program("chromium", "chromium-browser", "/usr/bin/chromium")
    path, _ = report
    probe = tmp_path / "probe.html"  # the report plus a measuring script (the report itself runs no script)
    probe.write_text(path.read_text(encoding="utf-8").replace("</body>", CHECK_SCRIPT + "</body>"), encoding="utf-8")
    for width in (1280, 800):
        done = chromium(browser, tmp_path / f"profile-{width}", f"--window-size={width},1000",
                        "--virtual-time-budget=10000", "--dump-dom", probe.as_uri())
        found = re.search(r'<pre id="oc-check">(.*?)</pre>', done.stdout, re.S)
        assert found, done.stderr[-2000:]
        check = json.loads(html.unescape(found.group(1)))
        # every part opened: no element wider than the page, no table scrolling sideways
        assert check["scrollWidth"] <= check["clientWidth"], (width, check)
        assert check["wide"] == [], (width, check)
        assert check["images"] == check["loaded"] == 5, (width, check)
        shot = tmp_path / f"report-{width}.png"
        chromium(browser, tmp_path / f"shot-{width}", f"--window-size={width},1000", f"--screenshot={shot}",
                 path.as_uri())
        assert shot.read_bytes().startswith(PNG_MAGIC) and len(shot.read_bytes()) > 20_000
