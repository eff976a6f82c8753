"""Code frequencies and banner tables (codes and nets by closed-ended variables) with significance tests.

Pure arrays in, result objects out: the study supplies who got which code, who answered, the banner
variables and an optional survey weight; opencode.analysis.tables.output renders the results.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
from scipy import sparse

from opencode.analysis.multiple_testing import bh_adjust
from opencode.analysis.tables.significance import (
    chi_square_rows,
    effective_bases,
    fisher_two_sided,
    rao_scott_rows,
    two_proportion_z,
    wilson_interval,
)
from opencode.errors import OpenCodeError

MIN_BASE = 30  # common practice (no published source): flag bases under 30 and do not test them


@dataclass(frozen=True)
class Code:
    """One code of a code frame."""

    number: int
    label: str


@dataclass(frozen=True)
class Net:
    """A grouping of codes (or of nets holding only codes), counted once per respondent."""

    number: int
    label: str
    members: tuple[int, ...]


@dataclass
class CodedQuestion:
    """One question's coding as arrays: who got which code, who answered, and the frame's codes and nets.

    `indicators` is respondents x codes (numpy or scipy.sparse, truthy = code given), columns in the order
    of `codes`. `answered` marks respondents with a verbatim that is not a non-answer; only they form the
    base. `non_answer` marks the non-answers, shown apart as a share of `has_verbatim` (everyone who gave a
    verbatim, coded or not; None: the answered and the non-answers).
    """

    name: str
    indicators: Any
    codes: Sequence[Code]
    answered: Any
    non_answer: Any = None
    nets: Sequence[Net] = ()
    label: str = ""
    respondent_ids: Sequence[Any] | None = None
    has_verbatim: Any = None


@dataclass
class BannerVariable:
    """A closed-ended variable across the top of a table: numeric codes per respondent (NaN = empty)."""

    name: str
    values: Any
    value_labels: Sequence[tuple[float, str]]
    missing: Sequence[float] = ()
    label: str = ""


@dataclass
class SurveyWeight:
    """A survey weight per respondent."""

    name: str
    values: Any


@dataclass(frozen=True)
class TableRow:
    """A row of a table: a net or a code; level 0 is outermost, members of a net sit one level deeper."""

    kind: str
    number: int
    label: str
    level: int


@dataclass(frozen=True)
class Base:
    """A base: respondents counted, their summed weight and the Kish effective base."""

    n: int
    weighted: float
    effective: float


@dataclass(frozen=True)
class BannerColumn:
    """A column of a banner table; the Total column has no variable and no letter."""

    variable: str | None
    variable_label: str
    code: float | None
    label: str
    letter: str


@dataclass
class FrequencyTable:
    """Code frequencies of one question: shares of the answered base, shares of mentions, non-answers apart."""

    question: str
    question_label: str
    rows: tuple[TableRow, ...]
    count: np.ndarray
    weighted_count: np.ndarray
    respondent_share: np.ndarray
    mentions: np.ndarray
    mention_share: np.ndarray
    base: Base
    non_answer: Base
    asked: Base
    total_mentions: float
    weight_name: str | None
    min_base: int = MIN_BASE
    ci_low: np.ndarray | None = None  # Wilson (1927) interval of respondent_share (Kish base when weighted)
    ci_high: np.ndarray | None = None
    confidence: float = 0.95
    show_intervals: bool = False

    @property
    def weighted(self) -> bool:
        """Whether a survey weight was applied."""
        return self.weight_name is not None

    @property
    def small_base(self) -> bool:
        """Whether the effective answered base is under the minimum (percentages to be read with caution)."""
        return self.base.effective < self.min_base

    @property
    def non_answer_share(self) -> float:
        """Non-answers as a share of all verbatims of the question, coded or not (NaN if there are none)."""
        return self.non_answer.weighted / self.asked.weighted if self.asked.weighted > 0 else float("nan")


@dataclass
class BannerTable:
    """Codes and nets by banner columns: column shares, bases, significance letters and per-row tests.

    `higher[r, a, b]` is 2 when column a's share is significantly higher than column b's at `confidence`,
    1 when only at `lower_confidence`, else 0. `pair_exact[k]` says pair k was compared by Fisher's exact test
    (a column's base under `min_base`) instead of the z-test. `row_p` / `row_q` (rows x banner variables) hold
    the per-row chi-square p-values (first-order Rao-Scott corrected when weighted, with the mean design
    effect in `row_design_effect`) and their Benjamini-Hochberg adjustment across the whole table.
    """

    question: str
    question_label: str
    rows: tuple[TableRow, ...]
    columns: tuple[BannerColumn, ...]
    variables: tuple[tuple[str, str], ...]
    count: np.ndarray
    weighted_count: np.ndarray
    column_share: np.ndarray
    base_n: np.ndarray
    base_weighted: np.ndarray
    base_effective: np.ndarray
    higher: np.ndarray
    pair_p: np.ndarray
    row_stat: np.ndarray
    row_df: np.ndarray
    row_p: np.ndarray
    row_q: np.ndarray
    weight_name: str | None
    confidence: float
    lower_confidence: float | None
    adjust_pairs: bool
    min_base: int = MIN_BASE
    pair_columns: np.ndarray = field(default_factory=lambda: np.empty((0, 2), dtype=int))
    pair_exact: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=bool))
    row_design_effect: np.ndarray | None = None
    ci_low: np.ndarray | None = None  # Wilson (1927) intervals of column_share (Kish bases when weighted)
    ci_high: np.ndarray | None = None
    show_intervals: bool = False

    @property
    def weighted(self) -> bool:
        """Whether a survey weight was applied."""
        return self.weight_name is not None

    @property
    def small_base(self) -> np.ndarray:
        """Columns whose effective base is under the minimum (flagged, not tested)."""
        return self.base_effective < self.min_base

    @property
    def row_significant(self) -> np.ndarray:
        """Rows x variables: the per-row chi-square is significant after Benjamini-Hochberg control."""
        return np.where(np.isnan(self.row_q), False, self.row_q < 1.0 - self.confidence)

    def letters(self) -> np.ndarray:
        """Rows x columns of letter strings: the columns each cell is significantly higher than."""
        upper = np.array([c.letter for c in self.columns], dtype=object)
        lower = np.array([c.letter.lower() for c in self.columns], dtype=object)
        out = np.full(self.higher.shape[:2], "", dtype=object)
        for b in range(self.higher.shape[2]):
            level = self.higher[:, :, b]
            out = out + np.where(level == 2, upper[b], np.where(level == 1, lower[b], ""))
        return out


def code_frequencies(question: CodedQuestion, weight: SurveyWeight | None = None, *, min_base: int = MIN_BASE,
                     confidence: float = 0.95) -> FrequencyTable:
    """Counts, % of respondents (answered base) with Wilson intervals, % of mentions and non-answers of one
    question's codes and nets."""
    n = _respondent_count(question)
    answered, non_answer = _masks(question, n)
    w = _weights(weight, question, answered | non_answer, n)
    rows, membership = _table_rows(question)
    codes = _code_matrix(question, n, answered)
    row_matrix = _row_indicators(codes, membership)
    total = sparse.csr_matrix(answered.reshape(-1, 1).astype(float))
    count, weighted_count, (base_n, base_w, base_eff) = _tally(row_matrix, total, w)
    count, weighted_count = count[:, 0], weighted_count[:, 0]
    code_mentions = np.asarray(codes.T @ w).ravel()
    mentions = np.asarray(membership.T @ code_mentions).ravel()
    total_mentions = float(code_mentions.sum())
    with np.errstate(divide="ignore", invalid="ignore"):
        respondent_share = weighted_count / base_w[0] if base_w[0] > 0 else np.full(len(rows), np.nan)
        mention_share = mentions / total_mentions if total_mentions > 0 else np.full(len(rows), np.nan)
    ci_low, ci_high = wilson_interval(respondent_share, base_eff[0], confidence)
    return FrequencyTable(
        question=question.name, question_label=question.label or question.name, rows=rows,
        count=count.astype(int), weighted_count=weighted_count, respondent_share=respondent_share,
        mentions=mentions, mention_share=mention_share,
        base=Base(int(base_n[0]), float(base_w[0]), float(base_eff[0])),
        non_answer=_base_of(non_answer, w), asked=_base_of(*_asked(question, weight, answered, non_answer, n)),
        total_mentions=total_mentions, weight_name=weight.name if weight is not None else None, min_base=min_base,
        ci_low=ci_low, ci_high=ci_high, confidence=confidence,
    )


def banner_table(
    question: CodedQuestion,
    banner: Sequence[BannerVariable],
    weight: SurveyWeight | None = None,
    *,
    confidence: float = 0.95,
    lower_confidence: float | None = None,
    adjust_pairs: bool = False,
    min_base: int = MIN_BASE,
    exact_small: bool = True,
) -> BannerTable:
    """Codes and nets (rows) by banner variables (columns, with a Total column first), with tests.

    Column proportions: pooled two-proportion z-tests between columns of the same banner variable; a cell
    gets the letter of each column it is significantly higher than (upper case at `confidence`, lower case
    at `lower_confidence` if given). With a weight the tests use the Kish effective bases of the columns.
    Each code row also gets a chi-square (present / absent by the variable's columns), Benjamini-Hochberg
    adjusted across the table; `adjust_pairs` applies Benjamini-Hochberg to the z-tests too. Columns whose
    effective base is under `min_base` are flagged; with `exact_small` their pairs are compared by Fisher's
    exact test on the 2 x 2 counts (effective counts, share x Kish base, rounded, when weighted) instead of the
    z-test, otherwise left untested; they stay out of the row chi-square. With a weight the row chi-square is
    the first-order Rao-Scott corrected Pearson statistic (Rao & Scott 1981, 1984). Every share gets a Wilson
    (1927) score interval at `confidence` (on the Kish effective base when weighted).
    """
    if not banner:
        raise OpenCodeError(f"question {question.name!r}: a banner table needs at least one banner variable")
    _check_levels(confidence, lower_confidence)
    n = _respondent_count(question)
    answered, non_answer = _masks(question, n)
    w = _weights(weight, question, answered | non_answer, n)
    rows, membership = _table_rows(question)
    row_matrix = _row_indicators(_code_matrix(question, n, answered), membership)

    columns = [BannerColumn(None, "", None, "Total", "")]
    blocks = [sparse.csr_matrix(answered.reshape(-1, 1).astype(float))]
    spans: list[tuple[int, int]] = []
    names = [v.name for v in banner]
    for variable in banner:
        if names.count(variable.name) > 1:
            raise OpenCodeError(f"banner variable {variable.name!r} appears twice in the banner")
        categories, onehot = _banner_onehot(variable, n, answered)
        start = len(columns)
        for code, label in categories:
            columns.append(BannerColumn(variable.name, variable.label or variable.name, code, label, ""))
        spans.append((start, len(columns)))
        blocks.append(onehot)
    letters = _letters(len(columns) - 1)
    columns = [columns[0]] + [
        BannerColumn(c.variable, c.variable_label, c.code, c.label, letter) for c, letter in zip(columns[1:], letters)
    ]

    column_matrix = sparse.hstack(blocks, format="csr")
    count, weighted_count, (base_n, base_w, base_eff) = _tally(row_matrix, column_matrix, w)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(base_w > 0, weighted_count / np.where(base_w > 0, base_w, 1.0), np.nan)
    testable = (base_eff >= min_base) & (base_n > 0)

    pair_columns = np.array(
        [(start + i, start + j) for start, stop in spans for i, j in zip(*np.triu_indices(stop - start, 1))],
        dtype=int,
    ).reshape(-1, 2)
    a, b = pair_columns[:, 0], pair_columns[:, 1]
    z, pair_p = two_proportion_z(share[:, a], base_eff[a], share[:, b], base_eff[b])
    both = testable[a] & testable[b]
    exact = ~both & (base_n[a] > 0) & (base_n[b] > 0) & exact_small
    if exact.any():
        ea, eb = a[exact], b[exact]
        pair_p[:, exact] = fisher_two_sided(share[:, ea] * base_eff[ea], base_eff[ea], share[:, eb] * base_eff[eb],
                                            base_eff[eb])
        z[:, exact] = np.sign(share[:, ea] - share[:, eb])
    untested = ~(both | exact)
    z[:, untested], pair_p[:, untested] = np.nan, np.nan
    decide = bh_adjust(pair_p) if adjust_pairs else pair_p
    higher = _higher_levels(z, decide, pair_columns, len(columns), confidence, lower_confidence)

    row_stat, row_df, row_p, row_deff = (np.full((len(rows), len(spans)), np.nan) for _ in range(4))
    squares = sparse.diags(w * w) @ column_matrix
    present_w2 = np.asarray((row_matrix.T @ squares).todense())
    base_w2 = np.asarray(squares.sum(axis=0)).ravel()
    for v, (start, stop) in enumerate(spans):
        keep = testable[start:stop]
        if weight is None:
            block_base = np.where(keep, base_eff[start:stop], 0.0)
            present = np.nan_to_num(share[:, start:stop]) * block_base
            row_stat[:, v], row_df[:, v], row_p[:, v] = chi_square_rows(present, block_base)
        else:
            block = slice(start, stop)
            row_stat[:, v], row_df[:, v], row_p[:, v], row_deff[:, v] = rao_scott_rows(
                weighted_count[:, block], np.where(keep, base_w[block], 0.0), present_w2[:, block],
                np.where(keep, base_w2[block], 0.0), np.where(keep, base_n[block], 0.0))
    ci_low, ci_high = wilson_interval(share, base_eff[None, :], confidence)

    return BannerTable(
        question=question.name, question_label=question.label or question.name, rows=rows, columns=tuple(columns),
        variables=tuple((v.name, v.label or v.name) for v in banner),
        count=count.astype(int), weighted_count=weighted_count, column_share=share,
        base_n=base_n.astype(int), base_weighted=base_w, base_effective=base_eff,
        higher=higher, pair_p=pair_p, row_stat=row_stat, row_df=row_df, row_p=row_p, row_q=bh_adjust(row_p),
        weight_name=weight.name if weight is not None else None, confidence=confidence,
        lower_confidence=lower_confidence, adjust_pairs=adjust_pairs, min_base=min_base, pair_columns=pair_columns,
        pair_exact=exact, row_design_effect=row_deff if weight is not None else None, ci_low=ci_low, ci_high=ci_high,
    )


def _check_levels(confidence: float, lower_confidence: float | None) -> None:
    """Confidence levels must lie in (0, 1), the lower one below the main one."""
    if not 0 < confidence < 1:
        raise OpenCodeError(f"confidence must be between 0 and 1, got {confidence}")
    if lower_confidence is not None and not 0 < lower_confidence < confidence:
        raise OpenCodeError(f"lower confidence must be between 0 and the confidence {confidence}, got {lower_confidence}")


def _respondent_count(question: CodedQuestion) -> int:
    """Number of respondents (rows of the indicator matrix), checked against the code list."""
    shape = getattr(question.indicators, "shape", None)
    if shape is None or len(shape) != 2:
        raise OpenCodeError(f"question {question.name!r}: code indicators must be a respondents x codes matrix")
    if shape[1] != len(question.codes):
        raise OpenCodeError(
            f"question {question.name!r}: the indicator matrix has {shape[1]} code columns but the frame lists {len(question.codes)} codes"
        )
    return int(shape[0])


def _masks(question: CodedQuestion, n: int) -> tuple[np.ndarray, np.ndarray]:
    """The answered and non-answer masks as boolean arrays of length n; a respondent cannot be both."""
    answered = _bool_vector(question.answered, n, f"question {question.name!r}: answered mask")
    if question.non_answer is None:
        non_answer = np.zeros(n, dtype=bool)
    else:
        non_answer = _bool_vector(question.non_answer, n, f"question {question.name!r}: non-answer mask")
    both = np.flatnonzero(answered & non_answer)
    if both.size:
        raise OpenCodeError(
            f"question {question.name!r}: {_row_name(question, both[0])} is marked both answered and non-answer"
        )
    return answered, non_answer


def _bool_vector(values: Any, n: int, what: str) -> np.ndarray:
    """A boolean vector of length n, or a clear error."""
    array = np.asarray(values)
    if array.shape != (n,):
        raise OpenCodeError(f"{what} has shape {array.shape}, expected ({n},) like the code indicators")
    return array.astype(bool)


def _row_name(question: CodedQuestion, index: int) -> str:
    """How an error names a respondent: 1-based row number and id when known."""
    if question.respondent_ids is not None:
        return f"row {index + 1} (respondent {question.respondent_ids[index]!r})"
    return f"row {index + 1}"


def _weights(weight: SurveyWeight | None, question: CodedQuestion, in_base: np.ndarray, n: int) -> np.ndarray:
    """Weights as floats (ones without a weight); empty or negative weights in the base are errors."""
    if weight is None:
        return np.ones(n)
    try:
        w = np.asarray(weight.values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise OpenCodeError(f"survey weight {weight.name!r}: values are not numbers ({exc})") from None
    if w.shape != (n,):
        raise OpenCodeError(f"survey weight {weight.name!r} has {w.shape[0] if w.ndim else 0} values, expected {n}")
    empty = np.flatnonzero(in_base & ~np.isfinite(w))
    if empty.size:
        raise OpenCodeError(
            f"survey weight {weight.name!r} is empty or not finite at {_row_name(question, empty[0])}"
            f" ({empty.size} respondent(s) in the base of question {question.name!r})"
        )
    negative = np.flatnonzero(w < 0)
    if negative.size:
        raise OpenCodeError(
            f"survey weight {weight.name!r} is negative ({w[negative[0]]:g}) at {_row_name(question, negative[0])}"
            f" ({negative.size} negative weight(s))"
        )
    return np.where(in_base, w, 0.0)


def _asked(question: CodedQuestion, weight: SurveyWeight | None, answered: np.ndarray, non_answer: np.ndarray,
           n: int) -> tuple[np.ndarray, np.ndarray]:
    """Everyone who gave a verbatim (coded or not) and their weights; a weight missing outside the base counts 0."""
    asked = answered | non_answer
    if question.has_verbatim is not None:
        asked = asked | _bool_vector(question.has_verbatim, n, f"question {question.name!r}: verbatim mask")
    if weight is None:
        return asked, np.ones(n)
    w = np.asarray(weight.values, dtype=float)
    return asked, np.where(asked & np.isfinite(w), w, 0.0)


def _code_matrix(question: CodedQuestion, n: int, answered: np.ndarray) -> sparse.csr_matrix:
    """Respondents x codes 0/1 float matrix, zeroed outside the answered base."""
    matrix = sparse.csr_matrix(question.indicators, dtype=float)
    matrix.data = (matrix.data != 0).astype(float)
    matrix = sparse.diags(answered.astype(float)) @ matrix
    matrix.eliminate_zeros()
    return matrix.tocsr()


def _table_rows(question: CodedQuestion) -> tuple[tuple[TableRow, ...], sparse.csr_matrix]:
    """Table rows (each top-level net, its members, then codes in no net) and a codes x rows membership matrix."""
    code_index: dict[int, int] = {}
    for i, code in enumerate(question.codes):
        if code.number in code_index:
            raise OpenCodeError(f"question {question.name!r}: code {code.number} appears twice in the code frame")
        code_index[code.number] = i
    nets: dict[int, Net] = {}
    for net in question.nets:
        if net.number in code_index or net.number in nets:
            raise OpenCodeError(f"question {question.name!r}: net {net.number} reuses the number of another code or net")
        nets[net.number] = net
    for net in question.nets:
        if not net.members:
            raise OpenCodeError(f"question {question.name!r}: net {net.number} ({net.label!r}) has no member codes")
        for member in net.members:
            if member not in code_index and member not in nets:
                raise OpenCodeError(f"question {question.name!r}: net {net.number} lists unknown code {member}")
            if member in nets and any(m in nets for m in nets[member].members):
                raise OpenCodeError(
                    f"question {question.name!r}: net {net.number} holds net {member}, which holds nets itself;"
                    " nets may nest one level only"
                )

    def member_codes(net: Net) -> list[int]:
        out: list[int] = []
        for m in net.members:
            out.extend(nets[m].members if m in nets else [m])
        return out

    rows: list[TableRow] = []
    columns: list[list[int]] = []

    def add(kind: str, number: int, label: str, level: int, codes: list[int]) -> None:
        rows.append(TableRow(kind, number, label, level))
        columns.append(sorted({code_index[c] for c in codes}))

    nested = {m for net in question.nets for m in net.members}
    for net in question.nets:
        if net.number in nested:
            continue
        add("net", net.number, net.label, 0, member_codes(net))
        for m in net.members:
            if m in nets:
                add("net", m, nets[m].label, 1, list(nets[m].members))
                for c in nets[m].members:
                    add("code", c, question.codes[code_index[c]].label, 2, [c])
            else:
                add("code", m, question.codes[code_index[m]].label, 1, [m])
    for code in question.codes:
        if code.number not in nested:
            add("code", code.number, code.label, 0, [code.number])

    indptr = np.cumsum([0] + [len(c) for c in columns])
    indices = np.array([i for c in columns for i in c], dtype=int)
    membership = sparse.csc_matrix((np.ones(indices.size), indices, indptr), shape=(len(question.codes), len(rows)))
    return tuple(rows), membership.tocsr()


def _row_indicators(codes: sparse.csr_matrix, membership: sparse.csr_matrix) -> sparse.csr_matrix:
    """Respondents x rows 0/1 matrix: a net row is 1 once for a respondent with any of its codes."""
    matrix = (codes @ membership).tocsr()
    matrix.data = (matrix.data > 0).astype(float)
    return matrix


def _tally(row_matrix: sparse.csr_matrix, columns: sparse.csr_matrix, w: np.ndarray):
    """Unweighted and weighted counts (rows x columns) and column bases (n, sum of weights, Kish n_eff)."""
    weighted_columns = sparse.diags(w) @ columns
    count = np.asarray((row_matrix.T @ columns).todense())
    weighted_count = np.asarray((row_matrix.T @ weighted_columns).todense())
    base_n = np.asarray(columns.sum(axis=0)).ravel()
    base_w = np.asarray(weighted_columns.sum(axis=0)).ravel()
    base_w2 = np.asarray(columns.T @ (w * w)).ravel()
    return count, weighted_count, (base_n, base_w, effective_bases(base_w, base_w2))


def _base_of(mask: np.ndarray, w: np.ndarray) -> Base:
    """The base of one respondent mask."""
    chosen = w[mask]
    return Base(int(mask.sum()), float(chosen.sum()), float(effective_bases(chosen.sum(), (chosen * chosen).sum())))


def _banner_onehot(variable: BannerVariable, n: int, answered: np.ndarray) -> tuple[list[tuple[float, str]], sparse.csr_matrix]:
    """A banner variable's columns (labelled codes in order, then unlabelled codes seen) and answered x column 0/1."""
    try:
        values = np.asarray(variable.values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise OpenCodeError(f"banner variable {variable.name!r}: values are not numeric codes ({exc})") from None
    if values.shape != (n,):
        raise OpenCodeError(f"banner variable {variable.name!r} has {values.size} values, expected {n}")
    values = np.where(np.isin(values, np.asarray(variable.missing, dtype=float)), np.nan, values)
    labels = [(float(code), str(label)) for code, label in variable.value_labels]
    labelled = [code for code, _ in labels]
    if len(set(labelled)) != len(labelled):
        raise OpenCodeError(f"banner variable {variable.name!r}: a value label code is listed twice")
    missing = set(float(m) for m in variable.missing)
    labels = [(code, label) for code, label in labels if code not in missing]
    observed = np.unique(values[np.isfinite(values)])
    if observed.size < 2:
        shown = ", ".join(f"{v:g}" for v in observed) or "none"
        raise OpenCodeError(
            f"banner variable {variable.name!r} has fewer than two categories among non-missing answers"
            f" (found: {shown}); a banner variable needs at least two"
        )
    known = {code for code, _ in labels}
    labels += [(float(v), f"{v:g}") for v in observed if v not in known]
    codes = np.array([code for code, _ in labels])
    order = np.argsort(codes)
    position = np.searchsorted(codes[order], values)
    position = np.clip(position, 0, codes.size - 1)
    found = np.isfinite(values) & answered & (codes[order][position] == values)
    rows = np.flatnonzero(found)
    onehot = sparse.csr_matrix(
        (np.ones(rows.size), (rows, order[position[found]])), shape=(n, len(labels))
    )
    return labels, onehot


def _letters(count: int) -> list[str]:
    """Column letters A..Z, then AA, AB...: one per banner column."""
    out = []
    for i in range(count):
        name, k = "", i
        while True:
            name = chr(ord("A") + k % 26) + name
            k = k // 26 - 1
            if k < 0:
                break
        out.append(name)
    return out


def _higher_levels(z: np.ndarray, p: np.ndarray, pairs: np.ndarray, n_columns: int, confidence: float,
                   lower_confidence: float | None) -> np.ndarray:
    """Rows x columns x columns int8: 2 = row's column a higher than b at `confidence`, 1 at the lower level only."""
    with np.errstate(invalid="ignore"):
        level = np.where(p < 1.0 - confidence, 2, 0)
        if lower_confidence is not None:
            level = np.where((level == 0) & (p < 1.0 - lower_confidence), 1, level)
    level = level.astype(np.int8)
    higher = np.zeros((z.shape[0], n_columns, n_columns), dtype=np.int8)
    a, b = pairs[:, 0], pairs[:, 1]
    higher[:, a, b] = np.where(z > 0, level, 0)
    higher[:, b, a] = np.where(z < 0, level, 0)
    return higher
