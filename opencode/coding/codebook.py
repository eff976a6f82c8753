"""A printable codebook (Markdown or HTML): each code's number, label, guidance, count and example verbatims.

Counts are verbatims with the code by hand (one coder, or any coder); a net counts a verbatim once however
many of its codes it holds (common practice, no published source). Example verbatims are masked (e-mail,
phone, web addresses) because verbatims can identify people.
"""

from __future__ import annotations

import html
import re
from dataclasses import dataclass
from pathlib import Path

from opencode.coding.frames import Code, Frame, load_frame
from opencode.errors import OpenCodeError
from opencode.files.cell_guard import guard_cell
from opencode.files.masking import mask_identifiers
from opencode.files.safe_write import atomic_open
from opencode.study import assignments_store as astore
from opencode.study import survey_data
from opencode.study.store import Study


@dataclass
class CodebookEntry:
    """One line of the codebook."""

    code: Code
    depth: int
    count: int
    examples: list[str]


def codebook_entries(study: Study, question: str, coder: str | None = None, examples: int = 3) -> list[CodebookEntry]:
    """The frame in reading order (nets, then their members indented) with counts and examples."""
    frame: Frame = load_frame(study, question)
    question_id = survey_data.get_question(study, question).id
    table = astore.assignments_table(study, question_id, [coder] if coder else None, ("hand",))
    holders: dict[int, set[int]] = {}
    for number, verbatim_id in zip(table["number"].tolist(), table["verbatim_id"].tolist()):
        holders.setdefault(number, set()).add(verbatim_id)

    def count(code: Code) -> int:
        if not code.is_net:
            return len(holders.get(code.number, ()))
        return len(set().union(*(holders.get(c.number, set()) for c in frame.leaves_under(code.number))))

    def texts(code: Code) -> list[str]:
        shown = list(code.examples)[:examples]
        if not code.is_net and len(shown) < examples:
            coded = astore.code_texts(study, question_id, code.id, coder, examples * 3)
            shown += [t for t in coded if t not in shown][: examples - len(shown)]
        return [mask_identifiers(t) for t in shown]

    entries: list[CodebookEntry] = []

    def walk(parent: int | None, depth: int) -> None:
        for code in sorted((c for c in frame.codes if c.net == parent), key=lambda c: c.number):
            entries.append(CodebookEntry(code, depth, count(code), texts(code)))
            if code.is_net:
                walk(code.number, depth + 1)

    walk(None, 0)
    return entries


def _status(code: Code) -> str:
    bits = [code.special] if code.special else []
    if not code.active:
        bits.append("retired")
    return f" ({', '.join(bits)})" if bits else ""


_MD_PUNCTUATION = re.compile(r"([\\`*_{}\[\]()#+!|~^$])")
_MD_LINE_START = re.compile(r"^(\s*)([-=>]|\d+[.)])")


def markdown_text(text: str) -> str:
    """User text as inert Markdown: cleaned and guarded like every written cell, on one line, HTML special
    characters as entities (no <script>, no <img onerror>), Markdown punctuation backslash-escaped (no links,
    emphasis or headings), and nothing at the start that opens a list, quote or heading."""
    one_line = " ".join(str(guard_cell(str(text))).split())
    escaped = _MD_PUNCTUATION.sub(r"\\\1", html.escape(one_line, quote=False))
    return _MD_LINE_START.sub(lambda m: m.group(1) + "\\" + m.group(2), escaped)


def _html_text(text: str) -> str:
    """User text for the HTML codebook: cleaned and guarded like every written cell, then escaped."""
    return html.escape(str(guard_cell(str(text))))


def codebook_markdown(study: Study, question: str, coder: str | None = None, examples: int = 3) -> str:
    """The codebook as Markdown."""
    frame = load_frame(study, question)
    who = f"coder {coder}" if coder else "all coders"
    md = markdown_text
    who = f"coder {md(coder)}" if coder else "all coders"
    lines = [f"# Codebook: {md(frame.name)}", "", f"Counts: verbatims coded by hand ({who}).", ""]
    for e in codebook_entries(study, question, coder, examples):
        c = e.code
        marker = "#" * min(2 + e.depth, 4)
        hotkey = f" \\[key {md(c.hotkey)}\\]" if c.hotkey else ""
        lines.append(f"{marker} {c.number} {md(c.label)}{' (net)' if c.is_net else ''}{md(_status(c))}{hotkey}: "
                     f"{e.count}")
        for title, text in (("", c.description), ("Include: ", c.include), ("Exclude: ", c.exclude),
                            ("Rule: ", c.rule)):
            if text:
                lines.append(f"{title}{md(text)}  ")
        lines += [f"- \u201c{md(t)}\u201d" for t in e.examples]
        lines.append("")
    return "\n".join(lines)


def codebook_html(study: Study, question: str, coder: str | None = None, examples: int = 3) -> str:
    """The codebook as a standalone HTML page (print-friendly)."""
    frame = load_frame(study, question)
    esc = _html_text
    who = f"coder {esc(coder)}" if coder else "all coders"
    parts = ["<!DOCTYPE html>", "<html lang='en'><head><meta charset='utf-8'>",
             f"<title>Codebook: {esc(frame.name)}</title>",
             "<style>body{font-family:sans-serif;max-width:60em;margin:auto}"
             ".net{font-weight:bold;margin-top:1em}.code{margin:.6em 0}.num{display:inline-block;width:3em}"
             ".n{color:#0072B2}.ex{color:#555;font-style:italic;margin-left:3em}.note{margin-left:3em}"
             "@media print{a{color:black}}</style></head><body>",
             f"<h1>Codebook: {esc(frame.name)}</h1><p>Counts: verbatims coded by hand ({who}).</p>"]
    for e in codebook_entries(study, question, coder, examples):
        c = e.code
        css = "net" if c.is_net else "code"
        hotkey = f" [key {esc(c.hotkey)}]" if c.hotkey else ""
        parts.append(f"<div class='{css}' style='margin-left:{2 * e.depth}em'><span class='num'>{c.number}</span>"
                     f"{esc(c.label)}{esc(_status(c))}{hotkey} <span class='n'>n = {e.count}</span>")
        for title, text in (("", c.description), ("Include: ", c.include), ("Exclude: ", c.exclude),
                            ("Rule: ", c.rule)):
            if text:
                parts.append(f"<div class='note'>{esc(title)}{esc(text)}</div>")
        parts += [f"<div class='ex'>&ldquo;{esc(t)}&rdquo;</div>" for t in e.examples]
        parts.append("</div>")
    parts.append("</body></html>")
    return "\n".join(parts)


def write_codebook(study: Study, question: str, path: str | Path, coder: str | None = None,
                   examples: int = 3) -> Path:
    """Write the codebook to .md or .html (chosen by the suffix)."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in (".md", ".markdown"):
        text = codebook_markdown(study, question, coder, examples)
    elif suffix in (".html", ".htm"):
        text = codebook_html(study, question, coder, examples)
    else:
        raise OpenCodeError(f"{path}: a codebook is written as .md or .html")
    with atomic_open(path) as handle:
        handle.write(text)
    return path
