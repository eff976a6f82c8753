"""The machine coder on a study: train from hand codes, report, suggest, semi-automatic apply, queues for people.

Machine codes are suggestions until a person accepts them: `apply_machine` writes source=machine rows only
on verbatims the coder has not touched (no hand code, not marked done), never over or beside a hand code.
Non-answers and empty verbatims are left out of training, cross-validation, the curve, suggestions and the
queues: the non-answer flag codes them, not the model (and the frame's non-answer code is not learned).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from opencode.coding.features import default_analyzer
from opencode.coding.frames import load_frame
from opencode.coding.history import Change
from opencode.coding.machine import (CURVE_DEFINITIONS, PUBLISHED_EXAMPLE, MachineCoder, code_precision_recall,
                                     coverage_curve, pick_threshold)
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import models_store
from opencode.study import survey_data
from opencode.study.store import Study, now
from opencode.coding.choices import FINAL  # noqa: F401  (the adjudicated codes; re-exported)


@dataclass
class TrainedModel:
    """A stored model with what it was trained on (and what was left out)."""

    id: int
    question: str
    question_id: int
    created_at: str
    model: MachineCoder
    train_ids: np.ndarray
    train_coders: list[str]
    meta: dict[str, Any] = field(default_factory=dict)

    @property
    def analyzer(self) -> Any:
        """The analyzer the model reads verbatims with."""
        return self.model.analyzer_

    @property
    def notes(self) -> list[str]:
        """What a reader should know about the training: verbatims used and left out, codes not learned."""
        left_out = int(self.meta.get("left_out", 0))
        notes = [f"trained on {len(self.train_ids):,} hand-coded verbatims; {left_out:,} coded non-answer or empty "
                 "verbatims left out (the non-answer flag codes them, not the model)"]
        if self.meta.get("nonanswer_codes"):
            notes.append("not learned: the frame's non-answer code(s) "
                         + ", ".join(str(c) for c in self.meta["nonanswer_codes"]))
        for code, n in self.model.skipped_:
            notes.append(f"cannot suggest code {code}: {n} coded example(s) (needs {self.model.min_examples}, and as "
                         "many without it)")
        if self.model.n_stalled_fits_:
            notes.append(f"{self.model.n_stalled_fits_} of the {self.model.n_fits_} model fits stopped at the "
                         f"iteration limit ({self.model.max_iter}) before converging, so the suggestions may be "
                         "slightly off; train again with a higher limit (--max-iter)")
        return notes


@dataclass
class TrainingSet:
    """Hand-coded verbatims to learn from: ids, texts, 0/1 codes, code numbers, coder per verbatim, and how
    many coded verbatims were left out as non-answers or empty."""

    ids: np.ndarray
    texts: list[str]
    Y: np.ndarray
    codes: list[int]
    coders: list[str]
    left_out: int = 0
    nonanswer_codes: list[int] = field(default_factory=list)


_CACHE: dict[tuple[str, int], TrainedModel] = {}


def _answered(frame: pd.DataFrame) -> np.ndarray:
    """Mask of verbatims that are answers: not flagged as non-answers and not empty."""
    text = frame["text"].fillna("").astype(str)
    return ~frame["nonanswer"].to_numpy(dtype=bool) & (text.str.strip() != "").to_numpy(dtype=bool)


def _coder_priority(study: Study, question_id: int, coder: str | None) -> list[str]:
    if coder:
        return [coder]
    active = [name for name, _ in astore.coders_of_question(study, question_id)]
    return [FINAL] + [name for name in active if name != FINAL]


def training_data(study: Study, question: str, coder: str | None = None) -> TrainingSet:
    """The hand-coded answers of a question to learn from.

    One coder when named; otherwise the `final` coder where it has coded a verbatim, else the most active
    coder who did. A verbatim counts as coded once it holds a hand code or is marked done (so "done, no
    code" teaches the model what is not each code). Non-answers and empty verbatims are left out and counted;
    the frame's non-answer code (special "nonanswer") is not learned.
    """
    question_id = survey_data.get_question(study, question).id
    usable = [c for c in load_frame(study, question).codes if not c.is_net and c.active]
    codes = [c.number for c in usable if c.special != "nonanswer"]
    nonanswer_codes = [c.number for c in usable if c.special == "nonanswer"]
    owner: dict[int, str] = {}
    for name in _coder_priority(study, question_id, coder):
        for verbatim_id in astore.coded_verbatim_ids(study, question_id, name).tolist():
            owner.setdefault(verbatim_id, name)
    if not owner:
        raise OpenCodeError(f"question {question!r}: no hand-coded verbatims" + (f" by {coder}" if coder else "")
                            + " to learn from")
    frame = survey_data.verbatims(study, question)
    frame = frame[frame["verbatim_id"].isin(owner)]
    answered = _answered(frame)
    left_out = int((~answered).sum())
    frame = frame[answered]
    if frame.empty:
        raise OpenCodeError(f"question {question!r}: the {left_out} hand-coded verbatims are all non-answers or "
                            "empty; there is no answer to learn from")
    ids = frame["verbatim_id"].to_numpy(dtype=np.int64)
    order = np.argsort(ids)
    ids, texts = ids[order], frame["text"].to_numpy()[order].tolist()
    table = astore.assignments_table(study, question_id, sorted(set(owner.values())), ("hand",))
    table = table[[owner.get(v) == c for v, c in zip(table["verbatim_id"], table["coder"])]]
    row_of = {v: i for i, v in enumerate(ids.tolist())}
    col_of = {c: j for j, c in enumerate(codes)}
    Y = np.zeros((len(ids), len(codes)), dtype=bool)
    for v, number in zip(table["verbatim_id"].tolist(), table["number"].tolist()):
        if number in col_of and v in row_of:
            Y[row_of[v], col_of[number]] = True
    return TrainingSet(ids, texts, Y, codes, [owner[v] for v in ids.tolist()], left_out, nonanswer_codes)


def require_access(study: Study) -> None:
    """On a server study the machine coder is the lead's: a coder is refused in one line (NotPermitted)."""
    models_store.require_access(study)


def train(study: Study, question: str, coder: str | None = None, analyzer: Any = None,
          **params: Any) -> TrainedModel:
    """Train and store a model for a question; codes with too few examples are not learned (model.skipped_),
    non-answers and empty verbatims are left out (counted in the result's notes). On a server study, the lead's."""
    models_store.require_access(study)
    analyzer = analyzer or default_analyzer(study, question)
    data = training_data(study, question, coder)
    model = MachineCoder(analyzer=analyzer, **params).fit(data.texts, pd.DataFrame(data.Y, columns=data.codes))
    meta, blob = model.to_state()
    question_id = survey_data.get_question(study, question).id
    meta.update({"question": question, "train_ids": data.ids.tolist(), "train_coders": data.coders,
                 "n_train": len(data.ids), "n_codes": len(model.classes_), "trained_by": coder or "oecode",
                 "left_out": data.left_out, "nonanswer_codes": data.nonanswer_codes})
    model_id = models_store.save_model(study, question_id, meta, blob)
    trained = TrainedModel(model_id, question, question_id, now(), model, data.ids, data.coders, meta)
    _CACHE[(str(study.path), question_id)] = trained
    return trained


def load_model(study: Study, question: str) -> TrainedModel:
    """The question's newest model (cached: loaded once per study and model)."""
    question_id = survey_data.get_question(study, question).id
    return _load(study, question_id, question)


def _load(study: Study, question_id: int, question: str | None) -> TrainedModel:
    models_store.require_access(study)
    model_id = models_store.latest_model_id(study, question_id)
    key = (str(study.path), question_id)
    cached = _CACHE.get(key)
    if cached is not None and cached.id == model_id:
        return cached
    if model_id is None:
        raise OpenCodeError(f"question {question or question_id!r}: no machine coder trained yet "
                            "(oecode model train STUDY --question Q)")
    meta, blob, created = models_store.load_model_row(study, model_id)
    model = MachineCoder.from_state(meta, blob)
    question = question or meta.get("question")
    trained = TrainedModel(model_id, question, question_id, created, model,
                           np.asarray(meta["train_ids"], dtype=np.int64), list(meta["train_coders"]), meta)
    _CACHE[key] = trained
    return trained


def suggest_one(study: Study, verbatim_id: int) -> list[tuple[int, float]]:
    """(code, probability) for one verbatim, most likely first, from its question's newest model; nothing for
    a non-answer or an empty verbatim (the non-answer flag codes those)."""
    question_id = astore.verbatim_question(study, verbatim_id)
    if question_id is None:
        raise OpenCodeError(f"verbatim {verbatim_id}: no such verbatim in {study.path.name}")
    trained = _load(study, question_id, None)
    text = astore.verbatim_text(study, verbatim_id) or ""
    if not text.strip() or astore.verbatim_is_nonanswer(study, verbatim_id):
        return []
    return trained.model.suggest_text(text)


def suggest(study: Study, question: str, verbatim_ids: list[int] | None = None, coder: str | None = None
            ) -> pd.DataFrame:
    """Probabilities (rows: verbatim ids; columns: code numbers) for the given verbatims, or those `coder`
    has not coded, or all of the question's verbatims; non-answers and empty verbatims are left out."""
    trained = load_model(study, question)
    frame = survey_data.verbatims(study, question)
    frame = frame[_answered(frame)]
    if verbatim_ids is None and coder is not None:
        verbatim_ids = astore.uncoded_ids(study, trained.question_id, coder, None, None, False)
    if verbatim_ids is not None:
        frame = frame[frame["verbatim_id"].isin(verbatim_ids)]
    proba = trained.model.predict_proba(frame["text"].tolist()) if len(frame) else \
        np.zeros((0, len(trained.model.classes_)))
    return pd.DataFrame(proba, index=frame["verbatim_id"].to_numpy(), columns=trained.model.classes_.tolist())


def code_report(study: Study, question: str) -> list[dict[str, Any]]:
    """Per code of the frame the model was trained with: cross-validated precision, recall, F1 and
    machine-versus-human kappa at probability 0.5, or why the model cannot suggest it (suggests=False)."""
    trained = load_model(study, question)
    model = trained.model
    labels = {c.number: c.label for c in load_frame(study, question).codes}
    m = model.metrics_
    column = {c: j for j, c in enumerate(model.classes_.tolist())}
    rows = []
    for code, examples in zip(model.codes_.tolist(), model.y_.sum(axis=0).tolist()):
        row = {"code": int(code), "label": labels.get(int(code), "?"), "examples": int(examples),
               "suggests": code in column}
        if code in column:
            j = column[code]
            row.update({"precision": float(m["precision"][j]), "recall": float(m["recall"][j]),
                        "f1": float(m["f1"][j]), "kappa": float(m["kappa"][j])})
        else:
            row.update({"precision": float("nan"), "recall": 0.0, "f1": 0.0, "kappa": float("nan")})
        rows.append(row)
    return rows


def respondent_ids(study: Study, question: str, verbatim_ids) -> list[str]:
    """The survey's respondent ids (what the desk's go-to takes) of a question's verbatims, in the order given."""
    by_id = survey_data.verbatims(study, question).set_index("verbatim_id")["respondent"].astype(str)
    return [by_id.get(int(v), "") for v in verbatim_ids]


#: the accuracy the curve's advice aims for when picking a threshold to suggest: Schonlau & Couper (2016)'s
#: example reached about 90% (PUBLISHED_EXAMPLE)
ADVICE_ACCURACY = PUBLISHED_EXAMPLE["accuracy"]


@dataclass
class CurveReport:
    """The coverage-versus-accuracy curve of a question's model (cross-validated), per-code figures at one
    threshold, the codes the model cannot suggest, and the definitions and comparison a reader needs."""

    rows: list[dict[str, float]]
    threshold: float
    codes: list[dict[str, Any]]
    cannot_suggest: list[tuple[int, str, int]]
    n_verbatims: int
    left_out: int
    notes: list[str]
    suggested_threshold: float | None = None  # the lowest threshold reaching ADVICE_ACCURACY (most auto-coded)
    suggestion: str = ""  # why that threshold, in words


def curve(study: Study, question: str, thresholds: list[float] | None = None, code_threshold: float = 0.8
          ) -> CurveReport:
    """Coverage versus accuracy per threshold from the model's cross-validated probabilities, measured against
    every code of the frame a person gave (codes the model cannot suggest included), with per-code precision
    and recall on the verbatims auto-coded at `code_threshold`."""
    trained = load_model(study, question)
    cv = trained.model.cross_validation()
    rows = coverage_curve(cv.truth, cv.proba, None if thresholds is None else np.asarray(thresholds))
    labels = {c.number: c.label for c in load_frame(study, question).codes}
    per_code = [{"code": int(c), "label": labels.get(int(c), "?"), "suggests": bool(ok), **figures}
                for c, ok, figures in zip(cv.codes.tolist(), cv.trained.tolist(),
                                          code_precision_recall(cv.truth, cv.proba, code_threshold))]
    cannot = [(int(c), labels.get(int(c), "?"), int(n)) for c, n in trained.model.skipped_]
    notes = list(CURVE_DEFINITIONS)
    notes.append(f"cross-validated ({trained.model.cv}-fold, out-of-fold probabilities) on {len(cv.truth):,} "
                 f"hand-coded verbatims; {int(trained.meta.get('left_out', 0)):,} non-answer or empty verbatims "
                 "left out (the non-answer flag codes them)")
    if cannot:
        notes.append("the model cannot suggest (too few examples): " + "; ".join(
            f"{c} {label} ({n})" for c, label, n in cannot) + ". A verbatim holding one of these is never exactly "
            "right when auto-coded; people code them.")
    at = next((r for r in rows if abs(r["threshold"] - PUBLISHED_EXAMPLE["threshold"]) < 1e-9), None)
    ours = (f"here at {PUBLISHED_EXAMPLE['threshold']:.2f}: {at['coverage']:.0%} auto-coded at "
            f"{at['accuracy']:.1%} accuracy" if at and at["verbatims"] else "")
    notes.append(f"Schonlau & Couper (2016) auto-code only when the model is confident and send the rest to people; "
                 f"on their data a threshold of {PUBLISHED_EXAMPLE['threshold']:.1f} auto-coded about "
                 f"{PUBLISHED_EXAMPLE['coverage']:.0%} at about {PUBLISHED_EXAMPLE['accuracy']:.0%} accuracy "
                 "(one code per answer, top probability above t)" + (f"; {ours}" if ours else "") + ". With several "
                 "codes per verbatim the rule here is stricter: sure about every code.")
    return CurveReport(rows, float(code_threshold), per_code, cannot, len(cv.truth),
                       int(trained.meta.get("left_out", 0)), notes, *_suggested_threshold(rows))


def _suggested_threshold(rows: list[dict[str, float]]) -> tuple[float | None, str]:
    """The threshold the curve's advice suggests and why: the lowest reaching ADVICE_ACCURACY (most verbatims
    auto-coded), else the most accurate one that auto-codes anything."""
    picked = pick_threshold(rows, ADVICE_ACCURACY)
    if picked is not None:
        row = next(r for r in rows if r["threshold"] == picked)
        return picked, (f"the lowest threshold reaching {ADVICE_ACCURACY:.0%} accuracy: {row['coverage']:.0%} of "
                        f"verbatims auto-coded at {row['accuracy']:.1%}")
    used = [r for r in rows if r["verbatims"]]
    if not used:
        return None, "no threshold auto-codes any verbatim yet: code more verbatims by hand and train again"
    best = max(used, key=lambda r: (r["accuracy"], -r["threshold"]))
    return best["threshold"], (f"no threshold reaches {ADVICE_ACCURACY:.0%} accuracy; the most accurate one "
                               f"auto-codes {best['coverage']:.0%} at {best['accuracy']:.1%}")


@dataclass
class ApplyReport:
    """What a semi-automatic apply wrote."""

    threshold: float
    candidates: int
    verbatims: int
    assignments: int
    replaced: int


def apply_machine(study: Study, question: str, threshold: float | None = None, target_accuracy: float | None = None,
                  coder: str = FINAL, actor: str | None = None) -> ApplyReport:
    """Write source=machine suggestions for verbatims the model is sure about (every code's probability
    >= t or <= 1 - t), codes with probability >= t; only on verbatims `coder` has not coded. Earlier machine
    suggestions on those verbatims are replaced. One undoable change."""
    if threshold is None:
        if target_accuracy is None:
            raise OpenCodeError("apply: give a threshold or a target accuracy")
        threshold = pick_threshold(curve(study, question).rows, target_accuracy)
        if threshold is None:
            raise OpenCodeError(f"apply: no threshold reaches accuracy {target_accuracy:.2f} in cross-validation; "
                                "code more verbatims or lower the target")
    if not 0.5 <= threshold < 1.0:
        raise OpenCodeError(f"apply: threshold {threshold} must be at least 0.5 and below 1")
    trained = load_model(study, question)
    proba = suggest(study, question, coder=coder)
    codes = proba.columns.to_numpy()
    values = proba.to_numpy()
    sure = ((values >= threshold) | (values <= 1 - threshold)).all(axis=1)
    ids = proba.index.to_numpy()
    code_ids = {c.number: c.id for c in load_frame(study, question).codes}
    report = ApplyReport(float(threshold), len(ids), 0, 0, 0)
    with study.transaction():
        change = Change(study)
        old = astore.assignments_table(study, trained.question_id, [coder], ("machine",))
        candidates = set(ids.tolist())
        for v, number in zip(old["verbatim_id"].tolist(), old["number"].tolist()):
            if v in candidates:
                change.remove_assignment(v, code_ids[number], coder)
                report.replaced += 1
        stamp = now()
        for row in np.flatnonzero(sure):
            chosen = np.flatnonzero(values[row] >= threshold)
            if not len(chosen):
                continue
            verbatim_id = int(ids[row])
            report.verbatims += 1
            for j in chosen:
                code_id = code_ids[int(codes[j])]
                if astore.get_assignment(study, verbatim_id, code_id, coder) is not None:
                    continue  # a rule suggestion is there already
                change.put_assignment({"verbatim_id": verbatim_id, "code_id": code_id, "coder": coder,
                                       "source": "machine", "confidence": float(values[row, j]),
                                       "created_at": stamp})
                report.assignments += 1
        change.commit(actor or coder, "apply-machine", "question", trained.question_id, question=question,
                      threshold=threshold, model=trained.id)
    return report


def learning_queue(study: Study, question: str, coder: str, n: int = 20, max_similarity: float = 0.8
                   ) -> list[dict[str, Any]]:
    """What to code next (active learning): the verbatims the model is least sure about (uncertainty sampling,
    Lewis & Gale 1994), skipping near-duplicates of ones already picked (cosine similarity of term vectors).
    Each item names its verbatim by the survey's respondent id ("respondent", what the desk's go-to takes)."""
    trained = load_model(study, question)
    frame = survey_data.verbatims(study, question, include_nonanswers=False)
    open_ids = set(astore.uncoded_ids(study, trained.question_id, coder, None, None, False))
    frame = frame[frame["verbatim_id"].isin(open_ids) & _answered(frame)]
    if frame.empty:
        return []
    X = trained.model.features(frame["text"].tolist())
    proba = trained.model.proba_of_features(X)
    doubt = 1.0 - np.abs(2.0 * proba - 1.0)
    score = doubt.max(axis=1)
    order = np.argsort(-score, kind="stable")
    picked: list[int] = []
    for row in order[: max(20 * n, 200)]:
        if picked and (X[picked] @ X[row].T).toarray().max() > max_similarity:
            continue
        picked.append(int(row))
        if len(picked) == n:
            break
    ids = frame["verbatim_id"].to_numpy()
    respondents = frame["respondent"].astype(str).to_numpy()
    texts = frame["text"].to_numpy()
    codes = trained.model.classes_
    return [{"verbatim_id": int(ids[r]), "respondent": respondents[r], "uncertainty": float(score[r]),
             "code": int(codes[doubt[r].argmax()]), "probability": float(proba[r, doubt[r].argmax()]),
             "text": texts[r]} for r in picked]


def second_look_queue(study: Study, question: str, coder: str | None = None, n: int = 20, strength: float = 0.8
                      ) -> list[dict[str, Any]]:
    """Hand codes the model strongly disagrees with in cross-validation (a code given with probability below
    1 - strength, or missing with probability above strength): re-checking these finds more coding errors
    than random re-checks (He & Schonlau 2021). Each item carries the survey's respondent id ("respondent")."""
    trained = load_model(study, question)
    model = trained.model
    y = model.y_[:, model.trained_]
    p = model.oof_proba_
    disagree = np.where(y, 1.0 - p, p)
    flagged = np.argwhere(disagree >= strength)
    owners = np.asarray(trained.train_coders, dtype=object)
    if coder is not None:
        flagged = flagged[owners[flagged[:, 0]] == coder]
    order = np.argsort(-disagree[flagged[:, 0], flagged[:, 1]], kind="stable")[:n]
    verbatims = survey_data.verbatims(study, question).set_index("verbatim_id")
    texts, respondents = verbatims["text"], verbatims["respondent"].astype(str)
    out = []
    for row, j in flagged[order]:
        verbatim_id = int(trained.train_ids[row])
        out.append({"verbatim_id": verbatim_id, "respondent": respondents.get(verbatim_id, ""), "coder": owners[row],
                    "code": int(model.classes_[j]),
                    "given": bool(y[row, j]), "probability": float(p[row, j]),
                    "why": "model doubts this code" if y[row, j] else "model expects this code",
                    "text": texts.get(verbatim_id, "")})
    return out
