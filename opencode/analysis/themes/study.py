"""Themes of a study's question: fit, search k, keep, reload, compare and promote a theme to a draft code.

The themes library (themes.py, theme_summary.py, theme_search.py) works on any count matrix; this module
feeds it the question's cached term matrix (non-answers left out and counted, verbatims with no terms
counted by the library), optional groups from a closed-ended variable (value labels, missing codes left
out) and optional seed lists (typed terms, or the codes of the question's frame), and keeps every run in the
study with its parameters, seed and lexicon version so it can be shown, compared and promoted later.
"""

from __future__ import annotations

import html
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np
import pandas as pd

from opencode.analysis.themes.charts import plot_theme_terms
from opencode.analysis.themes.format import format_k_search, format_prevalence, format_themes
from opencode.analysis.themes.search import DEFAULT_K_RANGE, KSearch, choose_k, parse_k_range
from opencode.analysis.themes.summary import (ThemeRun, compare_runs, find_themes, propose_code_label,
                                             unexplained_verbatims)
from opencode.analysis.themes.finder import LOSSES
from opencode.coding import rules as coding_rules
from opencode.coding.frames import Code, add_code, load_frame
from opencode.errors import OpenCodeError
from opencode.files.html_embed import png_img
from opencode.files.masking import mask_identifiers
from opencode.study import theme_runs_store as store
from opencode.study.store import Study
from opencode.study.survey_data import analysis_values, get_question, get_variable, respondent_keys, verbatims
from opencode.text.matrix import TermMatrix
from opencode.text.study_text import analyzer_for, get_lexicon, term_matrix
from opencode.files.textout import format_table
from opencode.analysis.choices import THEMES_MIN_DF as DEFAULT_MIN_DF  # common practice, no published source

KIND_THEMES, KIND_K_SEARCH = "themes", "k-search"
RULE_TERMS = 5
_PLACEHOLDER = re.compile(r"^(?:#\w+|_\w+_)$")  # #number, #url, #email (and the _num_ of older runs)


@dataclass
class QuestionCorpus:
    """A question's term matrix ready for the themes library: rows, display terms, texts and what was left out."""

    question: str
    tm: TermMatrix
    frame: pd.DataFrame
    terms: list[str]
    texts: list[str]
    doc_ids: list[str]
    n_verbatims: int
    n_nonanswers: int
    lexicon_version: str

    @property
    def source_rows(self) -> np.ndarray:
        """Row of `frame` behind each matrix row."""
        return np.asarray(self.tm.rows_source)


@dataclass
class QuestionThemes:
    """A theme run of one question with the settings that made it (id and time once stored)."""

    question: str
    run: ThemeRun
    settings: dict[str, Any]
    run_id: int | None = None
    created_at: str | None = None

    def to_frame(self) -> pd.DataFrame:
        """One row per theme: number, label, top terms, share of verbatims, dominant count, NPMI and UMass."""
        return pd.DataFrame([{"theme": t.index + 1, "label": t.label, "top_terms": ", ".join(t.top_terms),
                              "share": t.share, "n_dominant": t.n_dominant, "npmi": t.npmi, "umass": t.umass}
                             for t in self.run.themes])

    def to_full_frame(self) -> pd.DataFrame:
        """to_frame plus, for a run fitted with `by`, each group's share and the theme's p and q."""
        table = self.to_frame()
        prevalence = self.run.prevalence
        if prevalence is None:
            return table
        for j, group in enumerate(prevalence.shares.columns):
            table[f"share in {group}"] = prevalence.shares.to_numpy()[:, j]
        table["p"] = prevalence.tests["p"].to_numpy()
        table["q"] = prevalence.tests["p_adjusted"].to_numpy()
        return table


@dataclass
class QuestionKSearch:
    """A k search of one question with its settings (id and time once stored)."""

    question: str
    search: KSearch
    settings: dict[str, Any]
    run_id: int | None = None
    created_at: str | None = None


@dataclass
class SeedLists:
    """Seed term lists (as display terms) and where each came from."""

    lists: list[list[str]]
    sources: list[str]
    notes: list[str] = field(default_factory=list)


# -- the corpus ---------------------------------------------------------------------------------------------------
def _display_terms(tm: TermMatrix) -> list[str]:
    """Each term's commonest word form (what a reader recognises), or its name where forms would collide."""
    labels = list(tm.labels)
    if len(set(labels)) == len(labels):
        return labels
    counts = pd.Series(labels).value_counts()
    return [name if counts[label] > 1 else label for name, label in zip(tm.terms, labels)]


def question_corpus(study: Study, question: str, *, min_df: float | int = DEFAULT_MIN_DF,
                    max_df: float | int = 1.0, progress: Callable[[int, int], None] | None = None) -> QuestionCorpus:
    """The question's term matrix (study lexicon, cached) with display terms, texts and respondent ids by row."""
    tm, frame = term_matrix(study, question, min_df=min_df, max_df=max_df, progress=progress)
    rows = np.asarray(tm.rows_source)
    return QuestionCorpus(question=question, tm=tm, frame=frame, terms=_display_terms(tm),
                          texts=frame["text"].to_numpy()[rows].tolist(),
                          doc_ids=[str(d) for d in tm.doc_ids], n_verbatims=len(frame),
                          n_nonanswers=int(frame["nonanswer"].sum()),
                          lexicon_version=get_lexicon(study, question).version_hash())


def group_labels(study: Study, corpus: QuestionCorpus, variable: str) -> pd.Categorical:
    """A closed-ended variable's value labels by matrix row, in value order; missing codes and blanks are NaN."""
    var = get_variable(study, variable)
    if var.kind not in ("single", "numeric"):
        raise OpenCodeError(f"variable {variable!r} is {var.kind}: themes can be split by a single-choice or "
                            "numeric variable only")
    if var.role == "question":
        raise OpenCodeError(f"variable {variable!r} is an open question: split themes by a closed-ended variable")
    values = analysis_values(study, variable)
    position = {key: i for i, key in enumerate(respondent_keys(study))}
    respondents = corpus.frame["respondent"].to_numpy()[corpus.source_rows]
    row_values = values[[position[key] for key in respondents]]
    present = np.unique(row_values[~np.isnan(row_values)])
    order = [code for code in var.value_labels if code in set(present)] + \
        [code for code in present if code not in var.value_labels]
    labels = {code: var.display(code) for code in order}
    as_text = [None if np.isnan(v) else labels[v] for v in row_values]
    return pd.Categorical(as_text, categories=list(dict.fromkeys(labels.values())))


# -- seeds --------------------------------------------------------------------------------------------------------
def _column_of(corpus: QuestionCorpus, word: str, analyzer: Any) -> int | None:
    """The matrix column of a term typed as its name, display form, any word form or a word the analyzer reads."""
    try:
        return corpus.tm.column(word)
    except OpenCodeError:
        pass
    names = analyzer.tokens(word)
    if len(names) == 1 and names[0] in corpus.tm.terms:
        return corpus.tm.terms.index(names[0])
    return None


def parse_seed_spec(spec: str) -> list[list[str]]:
    """"safe,staff;hours,late" into [["safe", "staff"], ["hours", "late"]]."""
    lists = [[w.strip() for w in part.split(",") if w.strip()] for part in spec.split(";")]
    if not any(lists) or not all(lists):
        raise OpenCodeError(f"seed terms {spec!r}: write lists of terms separated by ';', terms by ',' "
                            "(e.g. \"safe,staff;hours,late\")")
    return lists


def seeds_from_terms(study: Study, corpus: QuestionCorpus, lists: Sequence[Sequence[str]]) -> SeedLists:
    """Typed seed lists resolved to the matrix's display terms; an unknown word is named with its list."""
    analyzer = analyzer_for(study, corpus.question)
    resolved = []
    for number, words in enumerate(lists, start=1):
        columns = []
        for word in words:
            column = _column_of(corpus, str(word), analyzer)
            if column is None:
                raise OpenCodeError(f"seed list {number}: {word!r} is not a term of question {corpus.question!r} "
                                    f"(after the lexicon and min_df; see `oecode words`)")
            columns.append(column)
        resolved.append([corpus.terms[c] for c in dict.fromkeys(columns)])
    return SeedLists(resolved, [f"terms: {', '.join(map(str, words))}" for words in lists])


def _rule_words(node: Any) -> list[tuple[str, ...]]:
    """The words and phrases a rule asks for (parts under NOT left out), as analyzer terms, in rule order."""
    if isinstance(node, coding_rules.Words):
        return [node.terms]
    if isinstance(node, coding_rules.Without):
        return []
    if isinstance(node, coding_rules.Near):
        return _rule_words(node.left) + _rule_words(node.right)
    if isinstance(node, (coding_rules.AnyOf, coding_rules.AllOf)):
        return [words for part in node.parts for words in _rule_words(part)]
    return []


def seeds_from_frame(study: Study, corpus: QuestionCorpus, codes: Sequence[int] | None = None) -> SeedLists:
    """Seed lists from the question's code frame: each code's rule words, else the words of its label.

    Nets, retired and special codes are skipped unless named in `codes`; a code none of whose words is a
    term of the matrix is skipped with a note.
    """
    frame = load_frame(study, corpus.question)
    by_number = frame.by_number()
    if codes is not None:
        unknown = [n for n in codes if n not in by_number]
        if unknown:
            raise OpenCodeError(f"question {corpus.question!r}: the frame has no code {', '.join(map(str, unknown))}")
        chosen = [by_number[n] for n in codes]
    else:
        chosen = [c for c in frame.codes if not c.is_net and c.active and c.special is None]
    analyzer = analyzer_for(study, corpus.question)
    position = {name: j for j, name in enumerate(corpus.tm.terms)}
    in_use = corpus.tm.df > 0
    seeds = SeedLists([], [])
    for code in chosen:
        if code.rule.strip():
            names = [t for words in _rule_words(coding_rules.parse_rule(code.rule, analyzer, code.number).tree)
                     for t in words]
            source = "rule"
        else:
            names, source = analyzer.tokens(code.label), "label"
        columns = list(dict.fromkeys(position[n] for n in names if n in position and in_use[position[n]]))
        if not columns:
            seeds.notes.append(f"code {code.number} ({code.label}): no term of its {source} is in the matrix; "
                               "not seeded")
            continue
        seeds.lists.append([corpus.terms[c] for c in columns])
        seeds.sources.append(f"code {code.number} {code.label} ({source})")
    if not seeds.lists:
        raise OpenCodeError(f"question {corpus.question!r}: no code of the frame gives a seed term in the matrix")
    return seeds


# -- fitting ------------------------------------------------------------------------------------------------------
def _check_method(method: str, loss: str) -> None:
    """Clear errors for a method or loss the CLI passes through."""
    if method not in ("nmf", "lda"):
        raise OpenCodeError(f"theme method {method!r}: choose nmf or lda")
    if loss not in LOSSES:
        raise OpenCodeError(f"NMF loss {loss!r}: choose frobenius or kl")
    if method == "lda" and LOSSES[loss] != "frobenius":
        raise OpenCodeError(f"loss {loss!r} is an NMF option: LDA has no loss to choose")


def question_themes(study: Study, question: str, *, k: int = 10, method: str = "nmf", loss: str = "frobenius",
                        by: str | None = None, seed_terms: Sequence[Sequence[str]] | str | None = None,
                        seed_from_frame: bool | Sequence[int] = False, min_df: float | int = DEFAULT_MIN_DF,
                        max_df: float | int = 1.0, random_state: int | None = 0, n_top: int = 10,
                        n_representatives: int = 5, save: bool = True, actor: str = "oecode",
                        progress: Callable[[int, int], None] | None = None, **finder_params: Any) -> QuestionThemes:
    """Fit k themes on a question's verbatims, optionally split by `by` and seeded; keep the run when `save`.

    seed_from_frame: True seeds from every active code of the question's frame, a list from those codes.
    """
    _check_method(method, loss)
    if seed_terms and seed_from_frame:
        raise OpenCodeError("give seed terms or seed from the frame, not both")
    corpus = question_corpus(study, question, min_df=min_df, max_df=max_df, progress=progress)
    seeds = None
    if seed_terms:
        seeds = seeds_from_terms(study, corpus, parse_seed_spec(seed_terms) if isinstance(seed_terms, str)
                                 else seed_terms)
    elif seed_from_frame:
        seeds = seeds_from_frame(study, corpus, None if seed_from_frame is True else list(seed_from_frame))
    groups = group_labels(study, corpus, by) if by else None
    if method == "nmf":
        finder_params["loss"] = loss
    run = find_themes(corpus.tm.counts, corpus.terms, k=k, method=method, texts=corpus.texts,
                      doc_ids=corpus.doc_ids, groups=groups, n_top=n_top, n_representatives=n_representatives,
                      random_state=random_state, seed_terms=seeds.lists if seeds else None, **finder_params)
    if corpus.n_nonanswers:
        run.notes.insert(0, f"{corpus.n_nonanswers} of {corpus.n_verbatims} verbatims are non-answers and were "
                            "left out")
    if seeds is not None:
        run.notes[-1:-1] = seeds.notes + [f"theme {i + 1} seeded from {source}" for i, source in
                                          enumerate(seeds.sources)]
    settings = {"kind": KIND_THEMES, "question": question, "k": int(k), "method": method,
                "loss": loss if method == "nmf" else None, "min_df": min_df, "max_df": max_df,
                "random_state": random_state, "by": by, "n_top": n_top, "n_representatives": n_representatives,
                "seed_sources": seeds.sources if seeds else [], "seed_lists": seeds.lists if seeds else [],
                "lexicon_version": corpus.lexicon_version, "n_verbatims": corpus.n_verbatims,
                "n_nonanswers": corpus.n_nonanswers, "finder_params": run.params}
    result = QuestionThemes(question, run, settings)
    if save:
        meta, arrays = run.to_record()
        result.run_id = store.save_run(study, get_question(study, question).id, method, k, settings, meta, arrays,
                                       actor=actor)
        result.created_at = store.run_created_at(study, result.run_id)
    return result


def question_theme_search(study: Study, question: str, k_range: str | Sequence[int] = DEFAULT_K_RANGE, *,
                      method: str = "nmf", loss: str = "frobenius", min_df: float | int = DEFAULT_MIN_DF,
                      max_df: float | int = 1.0, random_state: int | None = 0,
                      progress: Callable[[int, int, int], None] | None = None, save: bool = True,
                      actor: str = "oecode", **search_params: Any) -> QuestionKSearch:
    """Score each k of a range on the question's verbatims (coherence and stability) and keep the search."""
    _check_method(method, loss)
    ks = parse_k_range(k_range)
    corpus = question_corpus(study, question, min_df=min_df, max_df=max_df)
    if method == "nmf":
        search_params["loss"] = loss
    search = choose_k(corpus.tm.counts, ks, method=method, random_state=random_state, progress=progress,
                      **search_params)
    settings = {"kind": KIND_K_SEARCH, "question": question, "k_range": [ks[0], ks[-1]], "ks": ks,
                "method": method, "loss": loss if method == "nmf" else None, "min_df": min_df, "max_df": max_df,
                "random_state": random_state, "lexicon_version": corpus.lexicon_version,
                "n_verbatims": corpus.n_verbatims, "n_nonanswers": corpus.n_nonanswers}
    result = QuestionKSearch(question, search, settings)
    if save:
        result.run_id = store.save_run(study, get_question(study, question).id, method, search.recommended_k,
                                       settings, search.to_record(), {}, actor=actor)
        result.created_at = store.run_created_at(study, result.run_id)
    return result


def themes_with_chart(study: Study, question: str, chart_path: str | os.PathLike,
                      **fit_params: Any) -> tuple[QuestionThemes, Path]:
    """Fit and keep a run (question_themes's options) and draw its term chart as a PNG for a report."""
    result = question_themes(study, question, **fit_params)
    return result, plot_theme_terms(result.run, chart_path)


# -- stored runs ---------------------------------------------------------------------------------------------------
def load_theme_run(study: Study, run_id: int) -> QuestionThemes | QuestionKSearch:
    """A stored theme run or k search, rebuilt exactly as it was kept."""
    row = store.load_run(study, run_id)
    question = row.params.get("question", "")
    if row.params.get("kind") == KIND_K_SEARCH:
        return QuestionKSearch(question, KSearch.from_record(row.summary), row.params, row.id, row.created_at)
    return QuestionThemes(question, ThemeRun.from_record(row.summary, row.arrays), row.params, row.id,
                          row.created_at)


def load_themes(study: Study, run_id: int) -> QuestionThemes:
    """A stored theme run (a k search given here is a clear error)."""
    loaded = load_theme_run(study, run_id)
    if not isinstance(loaded, QuestionThemes):
        raise OpenCodeError(f"run {run_id} is a k search, not a theme run: fit k themes first "
                            f"(e.g. --k {loaded.search.recommended_k})")
    return loaded


def list_theme_runs(study: Study, question: str | None = None) -> pd.DataFrame:
    """Stored runs (of one question, or all): id, kind, created, question, method, k, min_df, by, seeded, lexicon."""
    question_id = None if question is None else get_question(study, question).id
    records = [{"run": r["id"], "kind": r["params"].get("kind", KIND_THEMES), "created": r["created_at"][:19],
                "question": r["params"].get("question", ""), "method": r["method"], "k": r["k"],
                "min_df": r["params"].get("min_df"), "by": r["params"].get("by") or "",
                "seeded": len(r["params"].get("seed_sources") or []),
                "lexicon": r["params"].get("lexicon_version", "")}
               for r in store.run_rows(study, question_id)]
    columns = ["run", "kind", "created", "question", "method", "k", "min_df", "by", "seeded", "lexicon"]
    return pd.DataFrame(records, columns=columns)


def delete_theme_run(study: Study, run_id: int, actor: str = "oecode") -> None:
    """Delete a stored run or k search (audited)."""
    store.delete_run(study, run_id, actor=actor)


def compare_theme_runs(study: Study, run_a: int, run_b: int) -> pd.DataFrame:
    """Match the themes of two stored runs by their top terms (compare_runs)."""
    return compare_runs(load_themes(study, run_a).run, load_themes(study, run_b).run)


def run_texts(study: Study, result: QuestionThemes) -> list[str | None]:
    """The study's current text of each row of a stored run (None where the verbatim is gone)."""
    frame = verbatims(study, result.question)
    by_respondent = dict(zip(frame["respondent"].astype(str), frame["text"]))
    ids = result.run.doc_ids if result.run.doc_ids is not None else []
    return [by_respondent.get(str(d)) for d in ids]


def unexplained_in_run(study: Study, run_id: int) -> pd.DataFrame:
    """The verbatims of a stored run that no theme explains, with their current text."""
    result = load_themes(study, run_id)
    return unexplained_verbatims(result.run, run_texts(study, result))


# -- promoting a theme to a code ----------------------------------------------------------------------------------
def theme_rule(top_terms: Sequence[str], analyzer: Any, n_terms: int = RULE_TERMS) -> str:
    """A starting keyword rule from a theme's top terms: "term1 OR term2 OR ..." (phrases quoted).

    Placeholder terms (e.g. #number) and words the analyzer drops are skipped; the rule is checked by parsing.
    """
    parts = []
    for term in top_terms:
        word = " ".join(re.sub(r'[()"]', " ", str(term).replace("_", " ") if not _PLACEHOLDER.match(str(term))
                               else "").split())
        if not word or not analyzer.tokens(word) or word.upper() in ("AND", "OR", "NOT"):
            continue
        part = f'"{word}"' if " " in word else word
        if part not in parts:
            parts.append(part)
        if len(parts) == n_terms:
            break
    if not parts:
        raise OpenCodeError("the theme's top terms give no word a keyword rule can use")
    rule = " OR ".join(parts)
    coding_rules.parse_rule(rule, analyzer)
    return rule


def promote_theme(study: Study, run_id: int, theme: int, *, question: str | None = None, label: str | None = None,
                  number: int | None = None, hotkey: str | None = None, n_rule_terms: int = RULE_TERMS,
                  actor: str = "oecode") -> Code:
    """Add a theme (numbered from 1, as shown) as a draft code of the question's frame, its top terms as its rule.

    The label is proposed from the top terms unless given; the code's description says where it came from.
    One transaction: the code (undoable add-code) and a promote-theme audit row linking run, theme and code.
    Reads only the run's stored theme summaries (not its arrays), so the desk can promote what it lists.
    """
    row = store.load_run(study, run_id)
    if row.params.get("kind") == KIND_K_SEARCH:
        raise OpenCodeError(f"run {run_id} is a k search, not a theme run: fit k themes first (e.g. --k {row.k})")
    run_question = row.params.get("question", "")
    if question is not None and get_question(study, question).id != row.question_id:
        raise OpenCodeError(f"run {run_id} belongs to question {run_question!r}, not {question!r}")
    question = question or run_question
    themes = row.summary.get("themes") or []
    if int(theme) != theme or not 1 <= theme <= len(themes):
        raise OpenCodeError(f"run {run_id} has themes 1-{len(themes)}: there is no theme {theme}")
    chosen = themes[int(theme) - 1]
    top_terms = [str(t) for t in chosen.get("top_terms") or []]
    rule = theme_rule(top_terms, analyzer_for(study, question), n_rule_terms)
    label = (label or "").strip() or propose_code_label(top_terms)
    description = (f"Draft from theme {theme} of theme run {run_id} ({row.method}, k={len(themes)}): "
                   "check the label, notes and rule before coding with it.")
    examples = [str(rep["text"]) for rep in (chosen.get("representatives") or [])[:3]
                if isinstance(rep, dict) and rep.get("text")]
    with study.transaction():
        code = add_code(study, question, label, number, hotkey=hotkey, description=description,
                        examples=examples, rule=rule, actor=actor)
        study.audit(actor, "promote-theme", "code", code.id,
                    {"run": int(run_id), "theme": int(theme), "question": question, "number": code.number,
                     "label": code.label, "rule": rule, "top_terms": top_terms})
    return code


# -- text output --------------------------------------------------------------------------------------------------
def _settings_line(settings: dict[str, Any]) -> str:
    """The settings a run was made with, on one line."""
    parts = [f"method {settings.get('method')}"]
    if settings.get("loss"):
        parts.append(f"loss {settings['loss']}")
    parts += [f"min_df {settings.get('min_df')}", f"random_state {settings.get('random_state')}",
              f"lexicon {settings.get('lexicon_version')}"]
    if settings.get("by"):
        parts.append(f"by {settings['by']}")
    return ", ".join(parts)


def format_question_themes(result: QuestionThemes, n_terms: int = 8, n_verbatims: int = 3,
                           width: int | None = None) -> str:
    """A run for the terminal, fitted to `width` (the terminal's by default): header, themes with top terms and
    weights, representative verbatims with scores, prevalence by group (Benjamini-Hochberg adjusted p),
    unexplained count and notes."""
    from opencode.files.textout import output_width

    width = width or output_width()
    run = result.run
    stored = f"theme run {result.run_id}" if result.run_id is not None else "theme run (not kept)"
    lines = [f"{stored}, question {result.question}" + (f", {result.created_at[:19]}" if result.created_at else ""),
             _settings_line(result.settings), "", format_themes(run, n_terms=n_terms, n_verbatims=0, width=width)]
    if n_verbatims > 0:
        lines += ["", "Representative verbatims (theme weight, share of the verbatim):"]
        for theme in run.themes:
            lines.append(f"{theme.index + 1:>2}. {theme.label}")
            for rep in theme.representatives[:n_verbatims]:
                text = " ".join(str(rep.text or "").split())
                who = rep.doc_id if rep.doc_id is not None else f"row {rep.row}"
                head = f"    {rep.score:6.3f} {rep.share:4.0%}  [{who}] "
                room = max(width - len(head), 20)
                lines.append(head + (text if len(text) <= room else text[:room - 3] + "..."))
    if run.prevalence is not None:
        lines += ["", f"Prevalence by {result.settings.get('by')} (share of each group's verbatims a theme "
                      "dominates; chi-square p per theme, q = Benjamini-Hochberg across themes):",
                  format_prevalence(run, width=width)]
    lines += ["", f"unexplained: {run.n_unexplained} verbatim(s) with terms explained by no theme "
                  f"(oecode themes show STUDY {result.run_id if result.run_id is not None else 'RUN'} --unexplained)"]
    return "\n".join(lines)


def format_question_k_search(result: QuestionKSearch) -> str:
    """A k search for the terminal: header, the curve table, the recommendation and its caution."""
    stored = f"k search {result.run_id}" if result.run_id is not None else "k search (not kept)"
    return "\n".join([f"{stored}, question {result.question}" +
                      (f", {result.created_at[:19]}" if result.created_at else ""),
                      _settings_line(result.settings), "", format_k_search(result.search)])


def format_run_list(table: pd.DataFrame) -> str:
    """Stored runs as an aligned table."""
    if table.empty:
        return "no theme runs kept yet"
    return format_table(list(table.columns), table.astype(object).where(table.notna(), "").astype(str).values.tolist(),
                        note="by run number")


def format_unexplained(table: pd.DataFrame, width: int | None = None) -> str:
    """Unexplained verbatims: respondent, best theme share, text (wrapped to the width)."""
    if table.empty:
        return "every verbatim with terms is explained by a theme"
    rows = [[d, f"{s:.0%}", " ".join(str(t or "").split())]
            for d, s, t in zip(table["doc_id"], table["best_share"], table["text"])]
    return format_table(["respondent", "best share", "text"], rows, width=width)


# -- report -----------------------------------------------------------------------------------------------------
def themes_html(result: QuestionThemes, chart: str | os.PathLike | bytes | None = None, *, quotes: int = 1) -> str:
    """An HTML fragment for the report: each theme's draft label, top terms, share and a masked example verbatim,
    then the term chart embedded as a PNG."""
    rows = []
    for theme in result.run.themes:
        examples = [mask_identifiers(r.text) for r in theme.representatives[:quotes] if r.text]
        rows.append("<tr>" + "".join(f"<td>{html.escape(str(cell))}</td>" for cell in (
            theme.index + 1, theme.label, ", ".join(theme.top_terms[:8]), f"{100 * theme.share:.1f}%",
            f"{theme.npmi:.2f}", " / ".join(examples))) + "</tr>")
    settings = result.settings
    parts = [f'<p class="oc-lead">{len(result.run.themes)} themes ({html.escape(str(settings.get("method", "")))}, '
             f"run {result.run_id}) in {html.escape(result.question)}; machine-found groups of terms to read, "
             "not codes: promote the ones that hold up into the code frame.</p>",
             '<table class="oc-table"><thead><tr><th>#</th><th>draft label</th><th>top terms</th>'
             "<th>share dominated</th><th>NPMI</th><th>example (masked)</th></tr></thead><tbody>",
             *rows, "</tbody></table>"]
    parts += [f'<p class="oc-note">{html.escape(note)}</p>' for note in result.run.notes]
    if chart is not None:
        parts.append(png_img(chart, f"term weights of the themes in {result.question}"))
    return "".join(parts)
