"""The machine coder: one-versus-rest logistic regression over analyzer terms with calibrated probabilities.

A scikit-learn estimator: parameters in `__init__`, `fit(X, Y)` learns from verbatim texts X and a 0/1 code
matrix Y (verbatims x codes, or a DataFrame whose columns are the code numbers), learned state ends in `_`,
`clone` and `get_params`/`set_params` work. Per code, an L2 logistic regression on tf-idf term features;
probabilities are calibrated by Platt scaling (Platt 1999) fitted on cross-validated decision values. For
honest cross-validated figures each fold's probabilities use a calibration fitted on the other folds'
out-of-fold decision values (cross-fitting), so no verbatim's own label touches its evaluated probability.
Codes with fewer than `min_examples` positive (or negative) examples are not learned: the model cannot
suggest them, and the coverage curve counts a verbatim holding one as not exactly right. State is arrays plus
a JSON vocabulary: stored without pickle, so opening someone else's study cannot run code.
"""

from __future__ import annotations

import io
import warnings
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pandas as pd
import scipy.sparse as sp
from sklearn.base import BaseEstimator
from sklearn.exceptions import ConvergenceWarning
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import KFold

from opencode.coding.features import TermVectorizer
from opencode.errors import OpenCodeError

STATE_FORMAT = 2  # 2: every code of Y kept (codes, trained mask, truth), the analyzer inside the model


def _sigmoid(z: np.ndarray) -> np.ndarray:
    return 0.5 * (1.0 + np.tanh(0.5 * z))


def _platt(decision: np.ndarray, y: np.ndarray, iterations: int = 100) -> tuple[float, float]:
    """Platt (1999) scaling: P(y=1 | f) = sigmoid(a f + b) on Platt's smoothed targets (N+ + 1) / (N+ + 2) and
    1 / (N- + 2), which keep small classes from reaching 0 or 1; fitted by Newton's method with backtracking
    as in Lin, Lin & Weng (2007), "A note on Platt's probabilistic outputs for support vector machines"."""
    f = np.asarray(decision, dtype=float)
    positives = float(np.sum(y))
    negatives = len(y) - positives
    t = np.where(y, (positives + 1.0) / (positives + 2.0), 1.0 / (negatives + 2.0))
    a, b = 0.0, float(np.log((positives + 1.0) / (negatives + 1.0)))  # Platt's starting point

    def loss(a: float, b: float) -> float:
        z = a * f + b
        return float(np.sum(np.logaddexp(0.0, z) - t * z))

    current = loss(a, b)
    for _ in range(iterations):
        p = _sigmoid(a * f + b)
        w = p * (1.0 - p) + 1e-12
        g = np.array([np.sum((p - t) * f), np.sum(p - t)])
        h = np.array([[np.sum(w * f * f) + 1e-12, np.sum(w * f)], [np.sum(w * f), np.sum(w) + 1e-12]])
        if np.abs(g).max() < 1e-6:
            break
        step = np.linalg.solve(h, g)
        size = 1.0
        while size > 1e-8:
            na, nb = a - size * step[0], b - size * step[1]
            new = loss(na, nb)
            if new <= current - 1e-4 * size * float(g @ step):  # Armijo condition
                break
            size /= 2.0
        if size <= 1e-8:
            break
        a, b, current = na, nb, new
    return float(a), float(b)


def code_metrics(y: np.ndarray, predicted: np.ndarray) -> dict[str, np.ndarray]:
    """Per column precision, recall, F1 and Cohen's kappa of 0/1 predictions against 0/1 labels."""
    y = y.astype(bool)
    p = predicted.astype(bool)
    tp = (y & p).sum(axis=0).astype(float)
    fp = (~y & p).sum(axis=0).astype(float)
    fn = (y & ~p).sum(axis=0).astype(float)
    tn = (~y & ~p).sum(axis=0).astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        precision = np.where(tp + fp > 0, tp / (tp + fp), 0.0)
        recall = np.where(tp + fn > 0, tp / (tp + fn), 0.0)
        f1 = np.where(precision + recall > 0, 2 * precision * recall / (precision + recall), 0.0)
        # Cohen's kappa of a 2x2 table in closed form: 2(ad - bc) / ((a+b)(b+d) + (a+c)(c+d)), Cohen (1960).
        denominator = (tp + fp) * (fp + tn) + (tp + fn) * (fn + tn)
        kappa = np.where(denominator > 0, 2 * (tp * tn - fn * fp) / denominator, np.nan)
    return {"precision": precision, "recall": recall, "f1": f1, "kappa": kappa,
            "positives": (tp + fn).astype(int)}


def _labels(Y: Any) -> tuple[np.ndarray, np.ndarray]:
    """(0/1 matrix as booleans, code of each column) from an array (codes 0..k-1) or a DataFrame (its columns)."""
    if isinstance(Y, pd.DataFrame):
        codes = np.asarray(Y.columns)
        values = Y.to_numpy()
    else:
        values = np.asarray(Y)
        if values.ndim == 1:
            values = values[:, None]
        codes = np.arange(values.shape[1] if values.ndim == 2 else 0)
    if values.ndim != 2:
        raise OpenCodeError(f"machine coder: codes must be a verbatims x codes table, got {values.ndim} dimension(s)")
    try:
        numbers = values.astype(float)
    except (TypeError, ValueError) as error:
        raise OpenCodeError("machine coder: the code table must hold 0/1 (or True/False) values") from error
    if not np.isin(numbers, (0.0, 1.0)).all():
        raise OpenCodeError("machine coder: the code table must hold only 0 and 1 (one column per code)")
    return numbers.astype(bool), codes


@dataclass
class CrossValidation:
    """Out-of-fold evidence of a fitted model over every code a person gave (codes it cannot suggest included).

    truth: the person's codes (verbatims x codes); proba: the model's cross-validated probabilities with 0 in
    the columns of codes it cannot suggest (it never gives them); trained: which codes it can suggest."""

    codes: np.ndarray
    truth: np.ndarray
    proba: np.ndarray
    trained: np.ndarray


class MachineCoder(BaseEstimator):
    """One-versus-rest calibrated logistic regression over analyzer terms (a scikit-learn estimator).

    Parameters: analyzer (turns texts into terms; None: the default Analyzer), C (inverse L2 strength), cv
    (folds), min_examples (fewest coded examples, and as many without, for a code to be learned),
    sublinear_tf, max_iter (iteration limit of each logistic fit), random_state.

    Learned: codes_ (every column of Y), y_ (Y as booleans), trained_ (mask over codes_ of the codes learned),
    classes_ (codes_[trained_]: the codes the model suggests, the columns of predict_proba), skipped_ ((code,
    examples) of the codes it cannot suggest), analyzer_, vectorizer_ (vocabulary and idf), coef_,
    intercept_, platt_, oof_proba_ (cross-validated probabilities, verbatims x classes_), metrics_
    (cross-validated precision, recall, F1, kappa and positives per class at probability 0.5), n_fits_ and
    n_stalled_fits_ (logistic fits, and those stopped by max_iter before converging: counted for the training
    notes instead of scikit-learn's ConvergenceWarning reaching the user).
    """

    def __init__(self, analyzer: Any = None, C: float = 1.0, cv: int = 5, min_examples: int = 5,
                 sublinear_tf: bool = True, max_iter: int = 100, random_state: int | None = 0):
        self.analyzer = analyzer
        self.C = C
        self.cv = cv
        self.min_examples = min_examples
        self.sublinear_tf = sublinear_tf
        self.max_iter = max_iter
        self.random_state = random_state

    # -- training ----------------------------------------------------------------------------------------------
    def _model(self) -> LogisticRegression:
        return LogisticRegression(C=self.C, solver="liblinear", max_iter=self.max_iter,
                                  random_state=self.random_state)

    def _fit_one(self, X: sp.spmatrix, y: np.ndarray) -> LogisticRegression:
        """One logistic fit; a fit stopped by max_iter is counted (the training notes say so in one sentence)
        instead of scikit-learn's ConvergenceWarning reaching the user."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            model = self._model().fit(X, y)
        self.n_fits_ += 1
        self.n_stalled_fits_ += int(np.max(model.n_iter_) >= self.max_iter)
        return model

    def _analyzer(self) -> Any:
        if self.analyzer is not None:
            return self.analyzer
        from opencode.text.analyzer import Analyzer

        return Analyzer()

    def fit(self, X: Sequence[str], Y: Any) -> "MachineCoder":
        """Learn from verbatim texts X and their codes Y (0/1, verbatims x codes; a DataFrame names the codes)."""
        texts = [t if isinstance(t, str) else "" for t in X]
        Y, codes = _labels(Y)
        if Y.shape[0] != len(texts):
            raise OpenCodeError(f"machine coder: {Y.shape[0]} rows of codes for {len(texts)} verbatims")
        if int(self.cv) != self.cv or self.cv < 2:
            raise OpenCodeError(f"machine coder: cv={self.cv} folds; give a whole number of at least 2")
        positives = Y.sum(axis=0)
        trained = (positives >= self.min_examples) & (len(texts) - positives >= self.min_examples)
        self.codes_ = codes
        self.y_ = Y
        self.trained_ = trained
        self.skipped_ = [(_plain(c), int(n)) for c, n, ok in zip(codes, positives, trained) if not ok]
        if not trained.any():
            raise OpenCodeError(f"machine coder: no code has {self.min_examples} or more coded examples (and as many "
                                "verbatims without it); code more verbatims first")
        if len(texts) < self.cv * 2:
            raise OpenCodeError(f"machine coder: {len(texts)} coded verbatims are too few to train and check a model")
        self.classes_ = codes[trained]
        self.analyzer_ = self._analyzer()
        self.vectorizer_ = TermVectorizer(sublinear_tf=self.sublinear_tf)
        X_terms = self.vectorizer_.fit_transform(self.analyzer_.term_lists(texts))
        Y = Y[:, trained]
        n, k = Y.shape
        folds = list(KFold(self.cv, shuffle=True, random_state=self.random_state).split(np.arange(n)))
        fold_of = np.empty(n, dtype=np.int64)
        for f, (_, test) in enumerate(folds):
            fold_of[test] = f
        decision = np.zeros((n, k))
        self.coef_ = np.zeros((k, X_terms.shape[1]))
        self.intercept_ = np.zeros(k)
        self.platt_ = np.zeros((k, 2))
        self.oof_proba_ = np.zeros((n, k))
        self.n_fits_ = self.n_stalled_fits_ = 0
        for j in range(k):
            y = Y[:, j]
            for train, test in folds:
                if y[train].min() == y[train].max():
                    decision[test, j] = 10.0 if y[train][0] else -10.0
                    continue
                decision[test, j] = self._fit_one(X_terms[train], y[train]).decision_function(X_terms[test])
            model = self._fit_one(X_terms, y)
            self.coef_[j] = model.coef_[0]
            self.intercept_[j] = model.intercept_[0]
            self.platt_[j] = _platt(decision[:, j], y)
            for f, (_, test) in enumerate(folds):
                others = fold_of != f
                a, b = _platt(decision[others, j], y[others])
                self.oof_proba_[test, j] = _sigmoid(a * decision[test, j] + b)
        self.metrics_ = code_metrics(Y, self.oof_proba_ >= 0.5)
        return self

    # -- prediction ---------------------------------------------------------------------------------------------
    def features(self, X: Sequence[str]) -> sp.csr_matrix:
        """The tf-idf term rows the model reads for texts (unknown terms ignored)."""
        return self.vectorizer_.transform(self.analyzer_.term_lists([t if isinstance(t, str) else "" for t in X]))

    def _decision(self, rows: sp.spmatrix) -> np.ndarray:
        return np.asarray(rows @ self.coef_.T) + self.intercept_

    def decision_function(self, X: Sequence[str]) -> np.ndarray:
        """Raw scores (verbatims x classes_)."""
        return self._decision(self.features(X))

    def predict_proba(self, X: Sequence[str]) -> np.ndarray:
        """Calibrated probability of each code the model suggests (verbatims x classes_)."""
        return self.proba_of_features(self.features(X))

    def proba_of_features(self, rows: sp.spmatrix) -> np.ndarray:
        """predict_proba for rows already turned into features (see `features`)."""
        return _sigmoid(self._decision(rows) * self.platt_[:, 0] + self.platt_[:, 1])

    def predict(self, X: Sequence[str], threshold: float = 0.5) -> np.ndarray:
        """0/1 codes (verbatims x classes_): probability at or above the threshold."""
        return (self.predict_proba(X) >= threshold).astype(np.int64)

    def suggest_text(self, text: str) -> list[tuple[Any, float]]:
        """(code, probability) for one text, most likely first (the desk asks at every step: kept cheap)."""
        x = self.vectorizer_.transform([self.analyzer_.tokens(text if isinstance(text, str) else "")])
        proba = self.proba_of_features(x)[0]
        order = np.argsort(-proba, kind="stable")
        return [(_plain(self.classes_[i]), float(proba[i])) for i in order]

    def cross_validation(self) -> CrossValidation:
        """The out-of-fold probabilities over every code of Y (0 where the model cannot suggest the code)."""
        proba = np.zeros(self.y_.shape)
        proba[:, self.trained_] = self.oof_proba_
        return CrossValidation(codes=self.codes_, truth=self.y_, proba=proba, trained=self.trained_)

    # -- storage (no pickle) -------------------------------------------------------------------------------------
    def to_state(self) -> tuple[dict[str, Any], bytes]:
        """(JSON-safe metadata, npz bytes) describing the fitted model."""
        params = {k: v for k, v in self.get_params(deep=False).items() if k != "analyzer"}
        meta = {"format": STATE_FORMAT, "params": params, "vocabulary": self.vectorizer_.vocabulary_,
                "skipped": [list(s) for s in self.skipped_], "fits": [self.n_fits_, self.n_stalled_fits_],
                "analyzer": self.analyzer_.to_dict() if hasattr(self.analyzer_, "to_dict") else None}
        buffer = io.BytesIO()
        np.savez_compressed(buffer, coef=self.coef_, intercept=self.intercept_, platt=self.platt_,
                            idf=self.vectorizer_.idf_, codes=np.asarray(self.codes_), trained=self.trained_,
                            oof_proba=self.oof_proba_.astype(np.float32), y=self.y_,
                            **{f"metric_{k}": v for k, v in self.metrics_.items()})
        return meta, buffer.getvalue()

    @classmethod
    def from_state(cls, meta: dict[str, Any], blob: bytes) -> "MachineCoder":
        """Rebuild a fitted model from `to_state` output (arrays loaded with allow_pickle=False)."""
        try:
            return cls._from_state(meta, blob)
        except (ValueError, KeyError, OSError, TypeError) as error:
            raise OpenCodeError(f"the stored machine coder is damaged or not one of ours ({error}); train it again"
                                ) from error

    @classmethod
    def _from_state(cls, meta: dict[str, Any], blob: bytes) -> "MachineCoder":
        from opencode.text.analyzer import Analyzer

        model = cls(**meta["params"])
        with np.load(io.BytesIO(blob), allow_pickle=False) as arrays:
            model.coef_ = arrays["coef"]
            model.intercept_ = arrays["intercept"]
            model.platt_ = arrays["platt"]
            model.oof_proba_ = arrays["oof_proba"].astype(float)
            model.metrics_ = {k[len("metric_"):]: arrays[k] for k in arrays.files if k.startswith("metric_")}
            model.codes_ = arrays["codes"]
            model.y_ = arrays["y"].astype(bool)
            # Models stored before format 2 kept only the learned codes.
            model.trained_ = arrays["trained"].astype(bool) if "trained" in arrays.files else \
                np.ones(len(model.codes_), dtype=bool)
            idf = arrays["idf"]
        model.classes_ = model.codes_[model.trained_]
        model.skipped_ = [tuple(s) for s in meta.get("skipped", [])]
        model.n_fits_, model.n_stalled_fits_ = meta.get("fits", [0, 0])  # not counted before they were stored
        model.analyzer_ = Analyzer.from_dict(meta["analyzer"]) if meta.get("analyzer") else Analyzer()
        model.vectorizer_ = TermVectorizer.from_state(meta["vocabulary"], idf, {"sublinear_tf": model.sublinear_tf})
        return model


def _plain(value: Any) -> Any:
    """A numpy scalar as a plain Python value."""
    return value.item() if hasattr(value, "item") else value


# -- semi-automatic coding: coverage versus accuracy ------------------------------------------------------------
CURVE_DEFINITIONS = (
    "auto-coded: the model is sure about every code it can suggest (probability >= t or <= 1 - t), so it codes "
    "the verbatim with the codes at or above t; people code the rest (semi-automatic coding, Schonlau & Couper "
    "2016).",
    "accuracy: share of auto-coded verbatims whose machine codes equal exactly the codes a person gave, every "
    "code of the frame counted, including codes the model cannot suggest.",
    "precision: share of the machine's codes on auto-coded verbatims that the person also gave; recall: share of "
    "the person's codes on auto-coded verbatims that the machine gave.",
)
#: Schonlau & Couper (2016), Survey Research Methods 10(2): on their data a threshold of 0.8 auto-coded about
#: 31% of answers at about 90% accuracy (their rule: the top probability of a single-code answer passes t).
PUBLISHED_EXAMPLE = {"threshold": 0.8, "coverage": 0.31, "accuracy": 0.90}


def coverage_curve(Y: np.ndarray, proba: np.ndarray, thresholds: np.ndarray | None = None) -> list[dict[str, float]]:
    """Semi-automatic coding (Schonlau & Couper 2016) per threshold t (see CURVE_DEFINITIONS): coverage (share
    auto-coded), accuracy (exact set match against every code a person gave), micro precision and recall on
    the auto-coded verbatims, and their count. Y holds every code a person gave; proba has a column per code
    of Y, 0 for a code the model cannot suggest."""
    Y = np.asarray(Y, dtype=bool)
    proba = np.asarray(proba, dtype=float)
    if Y.shape != proba.shape:
        raise OpenCodeError(f"coverage curve: codes {Y.shape} and probabilities {proba.shape} differ in shape")
    thresholds = np.round(np.arange(0.5, 1.0, 0.05), 2) if thresholds is None else np.asarray(thresholds)
    rows = []
    for t in thresholds:
        sure = ((proba >= t) | (proba <= 1 - t)).all(axis=1)
        predicted = proba >= t
        made, truth = predicted[sure], Y[sure]
        tp = float((made & truth).sum())
        rows.append({"threshold": float(t), "coverage": float(sure.mean()) if len(sure) else float("nan"),
                     "accuracy": float((made == truth).all(axis=1).mean()) if sure.any() else float("nan"),
                     "precision": tp / float(made.sum()) if made.sum() else float("nan"),
                     "recall": tp / float(truth.sum()) if truth.sum() else float("nan"),
                     "verbatims": int(sure.sum())})
    return rows


def code_precision_recall(Y: np.ndarray, proba: np.ndarray, threshold: float) -> list[dict[str, float]]:
    """Per code, on the verbatims auto-coded at the threshold: how often the machine gave it, how often the
    person did, precision and recall (NaN where undefined; a code the model cannot suggest has recall 0)."""
    Y = np.asarray(Y, dtype=bool)
    proba = np.asarray(proba, dtype=float)
    sure = ((proba >= threshold) | (proba <= 1 - threshold)).all(axis=1)
    made, truth = (proba >= threshold)[sure], Y[sure]
    tp = (made & truth).sum(axis=0)
    out = []
    for j in range(Y.shape[1]):
        machine, person = int(made[:, j].sum()), int(truth[:, j].sum())
        out.append({"machine": machine, "person": person, "both": int(tp[j]),
                    "precision": float(tp[j] / machine) if machine else float("nan"),
                    "recall": float(tp[j] / person) if person else float("nan")})
    return out


def pick_threshold(curve: list[dict[str, float]], target_accuracy: float) -> float | None:
    """The lowest threshold (most coverage) whose accuracy reaches the target, or None."""
    for row in sorted(curve, key=lambda r: r["threshold"]):
        if row["verbatims"] and row["accuracy"] >= target_accuracy:
            return row["threshold"]
    return None
