"""Keyword rules: a small boolean language over analyzer terms that pre-codes verbatims for a person to confirm.

Grammar (operators in capitals; anything else is a word), lowest binding first:

    rule    := or
    or      := and ("OR" and)*
    and     := not ("AND" not)*
    not     := "NOT" not | near
    near    := primary ("NEAR/" n primary)*        -- within n terms of each other, either order
    primary := WORD | "quoted phrase" | "(" rule ")"

Words and phrases pass through the analyzer, so "parking" matches "park" after stemming and a phrase matches
its terms in a row. Positions count the analyzer's terms (stop words removed). NEAR joins words, phrases and
OR groups of them. Rule matches are stored as source=rule suggestions, never over a hand code.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from opencode.coding.features import default_analyzer, term_lists, terms_of
from opencode.coding.frames import edit_code, get_code, load_frame
from opencode.coding.history import Change
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import survey_data
from opencode.study.store import Study, now

_TOKEN = re.compile(r'\s*(?:(?P<open>\()|(?P<close>\))|"(?P<phrase>[^"]*)"|(?P<quote>")|(?P<word>[^\s()"]+))')
_NEAR = re.compile(r"NEAR/(\d+)$")


# -- syntax tree ---------------------------------------------------------------------------------------------------
@dataclass
class Words:
    """A word or quoted phrase, as analyzer terms."""

    text: str
    terms: tuple[str, ...]
    position: int


@dataclass
class Near:
    """Two positional parts within `n` terms of each other."""

    left: Any
    right: Any
    n: int


@dataclass
class AnyOf:
    """OR."""

    parts: list


@dataclass
class AllOf:
    """AND."""

    parts: list


@dataclass
class Without:
    """NOT."""

    part: Any


@dataclass
class _Token:
    kind: str  # open close phrase word op end
    text: str
    position: int  # 1-based character position


def _positional(node: Any) -> bool:
    if isinstance(node, (Words, Near)):
        return True
    return isinstance(node, AnyOf) and all(_positional(p) for p in node.parts)


class _Parser:
    """Recursive descent over the token list; errors name the code and the character position."""

    def __init__(self, text: str, analyzer: Any, where: str):
        self.text, self.analyzer, self.where = text, analyzer, where
        self.tokens = self._lex(text)
        self.i = 0

    def error(self, position: int, message: str) -> OpenCodeError:
        return OpenCodeError(f"{self.where}, position {position}: {message}  [{self.text}]")

    def _lex(self, text: str) -> list[_Token]:
        tokens, at = [], 0
        while at < len(text):
            if not text[at:].strip():
                break
            match = _TOKEN.match(text, at)
            start = match.start(match.lastgroup) + 1
            if match.group("quote"):
                raise self.error(start, "this quote is never closed")
            if match.group("open"):
                tokens.append(_Token("open", "(", start))
            elif match.group("close"):
                tokens.append(_Token("close", ")", start))
            elif match.group("phrase") is not None:
                tokens.append(_Token("phrase", match.group("phrase"), start))
            else:
                word = match.group("word")
                is_op = word in ("AND", "OR", "NOT") or word.startswith("NEAR/") or word == "NEAR"
                tokens.append(_Token("op" if is_op else "word", word, start))
            at = match.end()
        tokens.append(_Token("end", "end of rule", len(text) + 1))
        return tokens

    def peek(self) -> _Token:
        return self.tokens[self.i]

    def take(self) -> _Token:
        token = self.tokens[self.i]
        self.i += 1
        return token

    def parse(self) -> Any:
        if self.peek().kind == "end":
            raise self.error(1, "the rule is empty")
        node = self.parse_or()
        token = self.peek()
        if token.kind != "end":
            what = "')' without a matching '('" if token.kind == "close" else repr(token.text)
            raise self.error(token.position, f"expected AND, OR, NEAR/n or the end, found {what}")
        return node

    def parse_or(self) -> Any:
        parts = [self.parse_and()]
        while self.peek().kind == "op" and self.peek().text == "OR":
            self.take()
            parts.append(self.parse_and())
        return parts[0] if len(parts) == 1 else AnyOf(parts)

    def parse_and(self) -> Any:
        parts = [self.parse_not()]
        while self.peek().kind == "op" and self.peek().text == "AND":
            self.take()
            parts.append(self.parse_not())
        if len(parts) > 1 and all(isinstance(p, Without) for p in parts):
            raise self.error(self.peek().position, "an AND of only NOT parts matches almost everything; "
                             "add a word that must be there")
        return parts[0] if len(parts) == 1 else AllOf(parts)

    def parse_not(self) -> Any:
        token = self.peek()
        if token.kind == "op" and token.text == "NOT":
            self.take()
            return Without(self.parse_not())
        return self.parse_near()

    def parse_near(self) -> Any:
        node = self.parse_primary()
        while self.peek().kind == "op" and self.peek().text.startswith("NEAR"):
            token = self.take()
            match = _NEAR.match(token.text)
            if not match or int(match.group(1)) < 1:
                raise self.error(token.position, f"{token.text!r}: write NEAR/n with n a whole number from 1 up")
            right = self.parse_primary()
            for side in (node, right):
                if not _positional(side):
                    raise self.error(token.position, f"{token.text} joins words, phrases or OR groups of them, "
                                     "not AND / NOT parts")
            node = Near(node, right, int(match.group(1)))
        return node

    def parse_primary(self) -> Any:
        token = self.take()
        if token.kind == "open":
            node = self.parse_or()
            closing = self.take()
            if closing.kind != "close":
                raise self.error(token.position, "this '(' is never closed")
            return node
        if token.kind in ("word", "phrase"):
            terms = tuple(terms_of(self.analyzer, token.text))
            if not terms:
                raise self.error(token.position, f"{token.text!r} has no terms after analysis (a stop word or "
                                 "punctuation), so it can never match")
            return Words(token.text, terms, token.position)
        if token.kind == "end":
            raise self.error(token.position, "the rule ends where a word, phrase or '(' was expected")
        raise self.error(token.position, f"expected a word, phrase or '(' but found {token.text!r}")


# -- evaluation ----------------------------------------------------------------------------------------------------
Spans = dict[int, list[tuple[int, int]]]  # doc -> (first, last) term positions of each match


def _needed(node: Any, out: set[str]) -> set[str]:
    if isinstance(node, Words):
        out.update(node.terms)
    elif isinstance(node, Near):
        _needed(node.left, out)
        _needed(node.right, out)
    elif isinstance(node, (AnyOf, AllOf)):
        for part in node.parts:
            _needed(part, out)
    elif isinstance(node, Without):
        _needed(node.part, out)
    return out


def _postings(lists: list[list[str]], wanted: set[str]) -> dict[str, dict[int, list[int]]]:
    index: dict[str, dict[int, list[int]]] = {t: {} for t in wanted}
    for doc, terms in enumerate(lists):
        for position, term in enumerate(terms):
            if term in wanted:
                index[term].setdefault(doc, []).append(position)
    return index


def _spans(node: Any, index: dict[str, dict[int, list[int]]]) -> Spans:
    if isinstance(node, Words):
        first, rest = node.terms[0], node.terms[1:]
        out: Spans = {}
        for doc, starts in index[first].items():
            for start in starts:
                if all(start + k + 1 in index[t].get(doc, ()) for k, t in enumerate(rest)):
                    out.setdefault(doc, []).append((start, start + len(rest)))
        return out
    if isinstance(node, AnyOf):
        out = {}
        for part in node.parts:
            for doc, spans in _spans(part, index).items():
                out.setdefault(doc, []).extend(spans)
        return out
    left, right = _spans(node.left, index), _spans(node.right, index)
    out = {}
    for doc in left.keys() & right.keys():
        for a in left[doc]:
            for b in right[doc]:
                gap = max(b[0] - a[1], a[0] - b[1])
                if gap <= node.n:
                    out.setdefault(doc, []).append((min(a[0], b[0]), max(a[1], b[1])))
    return out


def _docs(node: Any, index: dict[str, dict[int, list[int]]], n: int) -> np.ndarray:
    if isinstance(node, AllOf):
        hit = np.ones(n, dtype=bool)
        for part in node.parts:
            hit &= _docs(part, index, n)
        return hit
    if isinstance(node, Without):
        return ~_docs(node.part, index, n)
    if isinstance(node, AnyOf) and not _positional(node):
        hit = np.zeros(n, dtype=bool)
        for part in node.parts:
            hit |= _docs(part, index, n)
        return hit
    hit = np.zeros(n, dtype=bool)
    hit[list(_spans(node, index))] = True
    return hit


@dataclass
class Rule:
    """A parsed rule: its text, syntax tree and the terms it needs."""

    text: str
    tree: Any
    terms: set[str] = field(default_factory=set)

    def match(self, lists: list[list[str]]) -> np.ndarray:
        """Which of these term lists the rule matches (a boolean array)."""
        return _docs(self.tree, _postings(lists, self.terms), len(lists))


def parse_rule(text: str, analyzer: Any = None, code: int | None = None) -> Rule:
    """Parse a rule; errors name the code and the character position."""
    where = f"code {code} rule" if code is not None else "rule"
    tree = _Parser(text, analyzer or default_analyzer(), where).parse()
    return Rule(text, tree, _needed(tree, set()))


# -- on a study ----------------------------------------------------------------------------------------------------
@dataclass
class RuleHits:
    """What a rule matches in a question (a dry run)."""

    rule: str
    total: int
    verbatim_ids: list[int]
    texts: list[str]
    respondents: list[str] = field(default_factory=list)  # the survey's respondent ids (what the desk's go-to takes)

    @property
    def count(self) -> int:
        """How many verbatims match."""
        return len(self.verbatim_ids)


def _corpus(study: Study, question: str, analyzer: Any):
    frame = survey_data.verbatims(study, question)
    return frame, term_lists(analyzer, frame["text"].tolist())


def rule_hits(study: Study, question: str, rule: str, analyzer: Any = None, code: int | None = None) -> RuleHits:
    """Dry run: which verbatims a rule would pre-code, without writing anything."""
    analyzer = analyzer or default_analyzer(study, question)
    parsed = parse_rule(rule, analyzer, code)
    frame, lists = _corpus(study, question, analyzer)
    hit = parsed.match(lists)
    return RuleHits(rule, len(frame), frame["verbatim_id"].to_numpy()[hit].tolist(),
                    frame["text"].to_numpy()[hit].tolist(), frame["respondent"].astype(str).to_numpy()[hit].tolist())


def apply_rules(study: Study, question: str, coder: str = "final", codes: list[int] | None = None,
                analyzer: Any = None, actor: str | None = None) -> dict[int, int]:
    """Pre-code by every active code's rule (or the listed codes) as source=rule suggestions for `coder`.

    Earlier rule suggestions of those codes are replaced; hand codes and verbatims the coder marked done
    are never touched. One undoable change; returns code number -> suggestions written.
    """
    analyzer = analyzer or default_analyzer(study, question)
    frame_codes = [c for c in load_frame(study, question).codes
                   if c.rule and c.active and not c.is_net and (codes is None or c.number in codes)]
    if codes is not None:
        missing = set(codes) - {c.number for c in frame_codes}
        if missing:
            raise OpenCodeError(f"question {question!r}: code(s) {', '.join(map(str, sorted(missing)))} have no "
                                "rule (or are nets or retired)")
    parsed = [(c, parse_rule(c.rule, analyzer, c.number)) for c in frame_codes]
    verbatims, lists = _corpus(study, question, analyzer)
    ids = verbatims["verbatim_id"].to_numpy()
    question_id = survey_data.get_question(study, question).id
    written: dict[int, int] = {}
    with study.transaction():
        done = astore.marked_ids(study, question_id, coder)
        held = astore.assignments_table(study, question_id, [coder])
        change = Change(study)
        stamp = now()
        for code, rule in parsed:
            mine = held[held["number"] == code.number]
            hand = set(mine.loc[mine["source"] == "hand", "verbatim_id"].tolist())
            for verbatim_id in mine.loc[mine["source"] == "rule", "verbatim_id"].tolist():
                if verbatim_id in done:
                    continue
                change.remove_assignment(int(verbatim_id), code.id, coder)
            n = 0
            for verbatim_id in ids[rule.match(lists)].tolist():
                if verbatim_id in hand or verbatim_id in done:
                    continue
                existing = astore.get_assignment(study, verbatim_id, code.id, coder)
                if existing is not None:  # a machine suggestion: leave it
                    continue
                change.put_assignment({"verbatim_id": verbatim_id, "code_id": code.id, "coder": coder,
                                       "source": "rule", "confidence": None, "created_at": stamp})
                n += 1
            written[code.number] = n
        change.commit(actor or coder, "apply-rules", "question", question_id, question=question, coder=coder)
    return written


def set_rule(study: Study, question: str, number: int, rule: str, analyzer: Any = None,
             actor: str = "oecode") -> None:
    """Check and store a code's rule (an empty rule removes it)."""
    if rule.strip():
        parse_rule(rule, analyzer or default_analyzer(study, question), number)
    edit_code(study, question, number, actor=actor, rule=rule.strip())


def code_rule(study: Study, question: str, number: int) -> str:
    """The rule stored on a code ('' when none)."""
    return get_code(study, question, number).rule

