"""The machine coder: one-versus-rest logistic regression over analyzer terms with calibrated probabilities.

Per code, an L2 logistic regression on tf-idf term features; probabilities are calibrated by Platt scaling
(Platt 1999) fitted on cross-validated decision values. For honest cross-validated figures each fold's
probabilities use a calibration fitted on the other folds' out-of-fold decision values (cross-fitting), so
no verbatim's own label touches its evaluated probability. Codes with fewer than `min_examples` positive
(or negative) examples are skipped and reported. State is arrays plus a JSON vocabulary: stored without
pickle, so opening someone else's study cannot run code.
"""

from __future__ import annotations

import io
from typing import Any

import numpy as np
import scipy.sparse as sp
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import KFold

from opencode.coding.features import TermVectorizer, term_lists, terms_of
from opencode.errors import OpenCodeError


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


class MachineCoder:
    """One-versus-rest calibrated logistic regression over analyzer terms (scikit-learn style)."""

    def __init__(self, C: float = 1.0, cv: int = 5, min_examples: int = 5, sublinear_tf: bool = True,
                 random_state: int = 0):
        self.C = C
        self.cv = cv
        self.min_examples = min_examples
        self.sublinear_tf = sublinear_tf
        self.random_state = random_state

    # -- training ----------------------------------------------------------------------------------------------
    def _model(self) -> LogisticRegression:
        return LogisticRegression(C=self.C, solver="liblinear", random_state=self.random_state)

    def fit(self, lists: list[list[str]], Y: np.ndarray, codes: list[int]) -> "MachineCoder":
        """Learn from term lists and a 0/1 matrix Y (verbatims x codes) whose columns are `codes`."""
        Y = np.asarray(Y, dtype=bool)
        if Y.shape != (len(lists), len(codes)):
            raise OpenCodeError(f"machine coder: labels are {Y.shape}, expected {(len(lists), len(codes))}")
        positives = Y.sum(axis=0)
        usable = (positives >= self.min_examples) & (len(lists) - positives >= self.min_examples)
        self.skipped_ = [(int(c), int(n)) for c, n, ok in zip(codes, positives, usable) if not ok]
        if not usable.any():
            raise OpenCodeError(f"machine coder: no code has {self.min_examples} or more coded examples (and as many "
                                "verbatims without it); code more verbatims first")
        if len(lists) < max(self.cv, 2) * 2:
            raise OpenCodeError(f"machine coder: {len(lists)} coded verbatims are too few to train and check a model")
        self.codes_ = np.array([c for c, ok in zip(codes, usable) if ok], dtype=np.int64)
        Y = Y[:, usable]
        self.vectorizer_ = TermVectorizer(sublinear_tf=self.sublinear_tf)
        X = self.vectorizer_.fit_transform(lists)
        n, k = Y.shape
        folds = list(KFold(self.cv, shuffle=True, random_state=self.random_state).split(np.arange(n)))
        fold_of = np.empty(n, dtype=np.int64)
        for f, (_, test) in enumerate(folds):
            fold_of[test] = f
        decision = np.zeros((n, k))
        self.coef_ = np.zeros((k, X.shape[1]))
        self.intercept_ = np.zeros(k)
        self.platt_ = np.zeros((k, 2))
        self.oof_proba_ = np.zeros((n, k))
        for j in range(k):
            y = Y[:, j]
            for train, test in folds:
                if y[train].min() == y[train].max():
                    decision[test, j] = 10.0 if y[train][0] else -10.0
                    continue
                decision[test, j] = self._model().fit(X[train], y[train]).decision_function(X[test])
            model = self._model().fit(X, y)
            self.coef_[j] = model.coef_[0]
            self.intercept_[j] = model.intercept_[0]
            self.platt_[j] = _platt(decision[:, j], y)
            for f, (_, test) in enumerate(folds):
                others = fold_of != f
                a, b = _platt(decision[others, j], y[others])
                self.oof_proba_[test, j] = _sigmoid(a * decision[test, j] + b)
        self.y_ = Y
        self.metrics_ = code_metrics(Y, self.oof_proba_ >= 0.5)
        return self

    # -- prediction ---------------------------------------------------------------------------------------------
    def decision_function(self, X: sp.spmatrix) -> np.ndarray:
        """Raw scores (verbatims x codes)."""
        return np.asarray(X @ self.coef_.T) + self.intercept_

    def predict_proba(self, X: sp.spmatrix) -> np.ndarray:
        """Calibrated probability of each code (verbatims x codes)."""
        return _sigmoid(self.decision_function(X) * self.platt_[:, 0] + self.platt_[:, 1])

    def transform(self, analyzer: Any, texts: list[str]) -> sp.csr_matrix:
        """Feature rows for texts."""
        return self.vectorizer_.transform(term_lists(analyzer, texts))

    def suggest_text(self, analyzer: Any, text: str) -> list[tuple[int, float]]:
        """(code, probability) for one text, most likely first (the desk asks at every step: kept cheap)."""
        x = self.vectorizer_.transform([terms_of(analyzer, text)])
        proba = self.predict_proba(x)[0]
        order = np.argsort(-proba)
        return [(int(self.codes_[i]), float(proba[i])) for i in order]

    # -- storage (no pickle) -------------------------------------------------------------------------------------
    def to_state(self) -> tuple[dict[str, Any], bytes]:
        """(JSON-safe metadata, npz bytes) describing the fitted model."""
        meta = {"params": {"C": self.C, "cv": self.cv, "min_examples": self.min_examples,
                           "sublinear_tf": self.sublinear_tf, "random_state": self.random_state},
                "vocabulary": self.vectorizer_.vocabulary_, "skipped": self.skipped_}
        buffer = io.BytesIO()
        np.savez_compressed(buffer, coef=self.coef_, intercept=self.intercept_, platt=self.platt_,
                            idf=self.vectorizer_.idf_, codes=self.codes_, oof_proba=self.oof_proba_.astype(np.float32),
                            y=self.y_, **{f"metric_{k}": v for k, v in self.metrics_.items()})
        return meta, buffer.getvalue()

    @classmethod
    def from_state(cls, meta: dict[str, Any], blob: bytes) -> "MachineCoder":
        """Rebuild a fitted model from `to_state` output (arrays loaded with allow_pickle=False)."""
        try:
            return cls._from_state(meta, blob)
        except (ValueError, KeyError, OSError) as error:
            raise OpenCodeError(f"the stored machine coder is damaged or not one of ours ({error}); train it again"
                                ) from error

    @classmethod
    def _from_state(cls, meta: dict[str, Any], blob: bytes) -> "MachineCoder":
        model = cls(**meta["params"])
        with np.load(io.BytesIO(blob), allow_pickle=False) as arrays:
            model.coef_ = arrays["coef"]
            model.intercept_ = arrays["intercept"]
            model.platt_ = arrays["platt"]
            model.codes_ = arrays["codes"]
            model.oof_proba_ = arrays["oof_proba"].astype(float)
            model.y_ = arrays["y"]
            model.metrics_ = {k[len("metric_"):]: arrays[k] for k in arrays.files if k.startswith("metric_")}
            idf = arrays["idf"]
        model.vectorizer_ = TermVectorizer.from_state(meta["vocabulary"], idf, {"sublinear_tf": model.sublinear_tf})
        model.skipped_ = [tuple(s) for s in meta.get("skipped", [])]
        return model


def coverage_curve(Y: np.ndarray, proba: np.ndarray, thresholds: np.ndarray | None = None) -> list[dict[str, float]]:
    """Semi-automatic coding (Schonlau & Couper 2016): per threshold t, the share of verbatims the model is sure
    about (every code's probability >= t or <= 1 - t) and how often its code set is exactly right there,
    plus the precision and recall of the code assignments it would make (probability >= t)."""
    Y = np.asarray(Y, dtype=bool)
    thresholds = np.round(np.arange(0.5, 1.0, 0.05), 2) if thresholds is None else np.asarray(thresholds)
    rows = []
    for t in thresholds:
        sure = ((proba >= t) | (proba <= 1 - t)).all(axis=1)
        predicted = proba >= t
        exact = (predicted == Y).all(axis=1)
        made = predicted[sure]
        truth = Y[sure]
        tp = float((made & truth).sum())
        rows.append({"threshold": float(t), "coverage": float(sure.mean()),
                     "accuracy": float(exact[sure].mean()) if sure.any() else float("nan"),
                     "precision": tp / made.sum() if made.sum() else float("nan"),
                     "recall": tp / Y.sum() if Y.sum() else float("nan"),
                     "verbatims": int(sure.sum())})
    return rows


def pick_threshold(curve: list[dict[str, float]], target_accuracy: float) -> float | None:
    """The lowest threshold (most coverage) whose accuracy reaches the target, or None."""
    for row in sorted(curve, key=lambda r: r["threshold"]):
        if row["verbatims"] and row["accuracy"] >= target_accuracy:
            return row["threshold"]
    return None

