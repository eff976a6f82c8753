"""Drivers: which terms predict a 0/1 outcome, by penalized logistic regression with stability selection.

Input is a docs x terms count matrix (scipy.sparse). By default terms enter as presence (0/1: the verbatim
mentions the term), so an odds ratio reads "verbatims mentioning the term"; binary=False uses raw counts.
The penalty C is chosen by stratified cross-validation along an ascending C path (stopping once the score has
fallen for two steps); selection stability follows Meinshausen & Buhlmann (2010), JRSS B 72(4): the share of
fits on random half-samples that select the term: a non-zero coefficient under L1, a place among the
stability_top largest |coefficients| under L2 (the default penalty, which predicts held-out verbatims best;
L1 is there for a short list of terms with exact zeros).
"""

from __future__ import annotations

from collections.abc import Sequence

import inspect
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import scipy.sparse as sp
from joblib import Parallel, delayed
from scipy import stats
from sklearn.base import BaseEstimator
from sklearn.exceptions import ConvergenceWarning
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss, roc_auc_score
from sklearn.model_selection import StratifiedKFold

from opencode.analysis.drivers.outcome import small_group_warning
from opencode.analysis.drivers.univariate import presence, two_by_two, univariate_table
from opencode.errors import OpenCodeError
from opencode.files.textout import format_table

#: Below this cross-validated AUC (or when its 95% CI covers 0.5) the text is said not to predict the outcome.
MIN_USEFUL_AUC = 0.55

_PENALTY_L1_RATIO = {"l1": 1.0, "l2": 0.0}
_SCORINGS = {"log_loss": "log_loss", "neg_log_loss": "log_loss", "auc": "auc", "roc_auc": "auc"}
#: Verbatims on which C is searched and stability measured when there are more (see DriverRanker.search_rows).
#: 10,000 gives an out-of-fold AUC to about +-0.015 (95%) and 5,000-verbatim half-samples for stability, in a
#: fifth of the time 50,000 would take on 100,000 verbatims; the final fit and the 2x2 tests see all.
SEARCH_ROWS = 10_000
_NEW_STYLE_PENALTY = inspect.signature(LogisticRegression).parameters["penalty"].default == "deprecated"


def make_logistic(C: float, l1_ratio: float, solver: str, **params) -> LogisticRegression:
    """A scikit-learn LogisticRegression for a C and an L1 share, written for the installed scikit-learn."""
    if _NEW_STYLE_PENALTY:
        return LogisticRegression(C=C, l1_ratio=l1_ratio, solver=solver, **params)
    if np.isinf(C):
        return LogisticRegression(penalty=None, solver=solver, **params)
    penalty = {0.0: "l2", 1.0: "l1"}.get(float(l1_ratio), "elasticnet")
    extra = {"l1_ratio": l1_ratio} if penalty == "elasticnet" else {}
    return LogisticRegression(penalty=penalty, C=C, solver=solver, **extra, **params)


def hanley_mcneil_ci(auc: float, n_pos: int, n_neg: int, level: float = 0.95) -> tuple[float, float]:
    """Confidence interval for an AUC from Hanley & McNeil (1982), Radiology 143:29-36, eq. 2."""
    q1 = auc / (2 - auc)
    q2 = 2 * auc**2 / (1 + auc)
    variance = (auc * (1 - auc) + (n_pos - 1) * (q1 - auc**2) + (n_neg - 1) * (q2 - auc**2)) / (n_pos * n_neg)
    half = stats.norm.ppf(0.5 + level / 2) * np.sqrt(max(variance, 0.0))
    return max(0.0, auc - half), min(1.0, auc + half)


def _check_inputs(X, y, sample_weight, terms):
    """Validate and convert the matrix, outcome, weights and term labels; raise OpenCodeError when unusable."""
    if not sp.issparse(X):
        X = sp.csr_matrix(np.asarray(X, dtype=float))
    X = sp.csr_matrix(X, dtype=np.float64)
    y = np.asarray(y).ravel()
    if X.shape[0] != y.shape[0]:
        raise OpenCodeError(f"the term matrix has {X.shape[0]} verbatims but the outcome has {y.shape[0]} rows")
    if y.size and not np.isin(y, (0, 1)).all():
        raise OpenCodeError("the outcome must be coded 0/1 (build it with opencode.analysis.drivers.outcome.make_outcome)")
    y = y.astype(np.int8)
    if y.size == 0 or y.min() == y.max():
        raise OpenCodeError(f"the outcome has one class only ({y.size} rows); nothing can predict it")
    if terms is None:
        terms = [f"term{j}" for j in range(X.shape[1])]
    terms = [str(t) for t in terms]
    if len(terms) != X.shape[1]:
        raise OpenCodeError(f"{len(terms)} term labels for a matrix with {X.shape[1]} term columns")
    if sample_weight is not None:
        sample_weight = np.asarray(sample_weight, dtype=float).ravel()
        if sample_weight.shape != y.shape:
            raise OpenCodeError(f"{sample_weight.size} survey weights for {y.size} verbatims")
        bad = np.flatnonzero(~np.isfinite(sample_weight) | (sample_weight < 0))
        if bad.size:
            raise OpenCodeError(f"survey weight in row {bad[0]} is {sample_weight[bad[0]]}; weights must be "
                                "finite and not negative")
    return X, y, sample_weight, terms


def constant_columns(X) -> np.ndarray:
    """Boolean mask of term columns with zero variance over the rows (absent everywhere, or the same everywhere)."""
    mean = np.asarray(X.mean(axis=0)).ravel()
    mean_sq = np.asarray(X.multiply(X).mean(axis=0)).ravel()
    return (mean_sq - mean**2) <= 1e-12 * np.maximum(1.0, mean_sq)


def _weighted(values, weights):
    return None if weights is None else weights[values]


def _score(y, p, weights, scoring: str) -> float:
    if scoring == "auc":
        return roc_auc_score(y, p, sample_weight=weights)
    return -log_loss(y, p, sample_weight=weights, labels=[0, 1])


@dataclass
class _FitSpec:
    """What every logistic fit in one DriverRanker run shares."""

    l1_ratio: float
    solver: str
    class_weight: object
    max_iter: int
    tol: float
    random_state: int
    path_solver: str  # for the many CV-path and half-sample fits
    stalled: list = field(default_factory=list)  # one entry per fit stopped by max_iter (list.append: thread-safe)

    def model(self, C: float, many: bool = False) -> LogisticRegression:
        """A model for the final fit, or (many=True) for one of the CV-path and half-sample fits."""
        params = dict(class_weight=self.class_weight, max_iter=self.max_iter, tol=self.tol,
                      random_state=self.random_state)
        return make_logistic(C, self.l1_ratio, self.path_solver if many else self.solver, **params)

    def fit(self, model, X, y, weights):
        """Fit; a fit stopped by the iteration limit is counted (the fit's notes say so in one sentence)
        instead of scikit-learn's ConvergenceWarning reaching the user."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            model.fit(X, y, sample_weight=weights)
        if np.max(model.n_iter_) >= self.max_iter:
            self.stalled.append(1)
        return model


def _fold_path(spec: _FitSpec, Cs, X, y, w, train, test, scoring: str):
    """Fit one CV fold along the ascending C path; return held-out probabilities and scores per C.

    Every C starts cold: scikit-learn's tol applies to the gradient of the mean loss, and a start from the
    previous C's optimum already meets it, so warm-started fits stop at once and repeat the previous scores.
    """
    probs = np.full((len(test), len(Cs)), np.nan)
    scores = np.full(len(Cs), np.nan)
    X_train, y_train, w_train = X[train], y[train], _weighted(train, w)
    X_test, y_test, w_test = X[test], y[test], _weighted(test, w)
    falling, best = 0, -np.inf
    for k, C in enumerate(Cs):
        model = spec.fit(spec.model(C, many=True), X_train, y_train, w_train)
        probs[:, k] = model.predict_proba(X_test)[:, 1]
        scores[k] = _score(y_test, probs[:, k], w_test, scoring)
        falling = falling + 1 if scores[k] < best else 0
        best = max(best, scores[k])
        if falling >= 2:
            break
    return probs, scores


def _subsample_support(spec: _FitSpec, C: float, X, y, w, rows, top: int | None) -> np.ndarray:
    """Which terms one half-sample fit selects: non-zero coefficients, or the `top` largest |coef| (L2)."""
    model = spec.fit(spec.model(C, many=True), X[rows], y[rows], _weighted(rows, w))
    coef = model.coef_.ravel()
    if top is None:
        return coef != 0
    chosen = np.zeros(coef.shape, bool)
    chosen[np.argsort(-np.abs(coef))[:top]] = True
    return chosen


class DriverRanker(BaseEstimator):
    """Rank terms by how they predict a 0/1 outcome: penalized logistic model + stability + univariate evidence.

    penalty: "l2" (default: it predicts held-out verbatims best), "l1" (a short list of non-zero terms, exact
    stability selection) or "elasticnet" (mixing by l1_ratio). Cs: candidate penalties C (int = that many on a
    log grid from 1e-2 to 1e2). scoring: "auc" (default) or "log_loss" for choosing C. class_weight: passed to
    scikit-learn ("balanced" or None). n_subsamples: half-sample fits for selection stability.
    stability_top: for L2 (no exact zeros) a term counts as selected when among this many largest |coef|.
    c_rule: "1se" (default) takes the most regularized C whose cross-validated score is within one standard
    error of the best (the one-standard-error rule: Breiman et al. 1984; Hastie, Tibshirani & Friedman 2009,
    section 7.10), which steadies the ranking and holds out better on short texts; "best" takes the best score.
    search_rows: at survey scale (more verbatims than this) C is chosen, the cross-validated quality measured
    and the stability half-samples drawn on a stratified random subsample of this many verbatims; the model
    and the ranking's 2x2 evidence always use every verbatim (search_rows_used_ says how many were searched,
    and a note says so). None searches on all. Cross-validated AUC and log-loss are then out-of-fold figures
    over the subsample (their interval is the subsample's), and C carries over as the same prior: scikit-learn's
    C multiplies a sum over rows, as it does from the CV folds (4/5 of the rows) to the full fit anyway.
    """

    def __init__(self, penalty: str = "l2", *, Cs=10, l1_ratio: float = 0.5, cv: int = 5,
                 scoring: str = "auc", class_weight=None, n_subsamples: int = 50,
                 subsample_fraction: float = 0.5, binary: bool = True, stability_top: int = 50,
                 solver: str = "auto", max_iter: int = 1000, tol: float = 1e-4, prior_scale: float = 0.1,
                 n_jobs: int | None = None, random_state: int = 0, c_rule: str = "1se",
                 search_rows: int | None = SEARCH_ROWS):
        self.penalty = penalty
        self.Cs = Cs
        self.l1_ratio = l1_ratio
        self.cv = cv
        self.scoring = scoring
        self.class_weight = class_weight
        self.n_subsamples = n_subsamples
        self.subsample_fraction = subsample_fraction
        self.binary = binary
        self.stability_top = stability_top
        self.solver = solver
        self.max_iter = max_iter
        self.tol = tol
        self.prior_scale = prior_scale
        self.n_jobs = n_jobs
        self.random_state = random_state
        self.c_rule = c_rule
        self.search_rows = search_rows

    # -- settings -------------------------------------------------------------------------------------------
    def _spec(self) -> _FitSpec:
        if self.penalty == "elasticnet":
            if not 0.0 <= self.l1_ratio <= 1.0:
                raise OpenCodeError(f"l1_ratio must lie in [0, 1], got {self.l1_ratio}")
            l1_ratio = float(self.l1_ratio)
        elif self.penalty in _PENALTY_L1_RATIO:
            l1_ratio = _PENALTY_L1_RATIO[self.penalty]
        else:
            raise OpenCodeError(f"unknown penalty {self.penalty!r}; choose l1, l2 or elasticnet")
        solver = path_solver = self.solver
        if solver == "auto":
            solver = {1.0: "liblinear", 0.0: "lbfgs"}.get(l1_ratio, "saga")
            # L2 on sparse term matrices: newton-cg takes ~7 Newton steps of sparse Hessian products where lbfgs
            # takes 50-200 gradient steps, 2-4x faster and closer to the optimum at the same tol. It runs the
            # many CV-path and half-sample fits; the reported model stays on lbfgs.
            path_solver = "newton-cg" if l1_ratio == 0.0 else solver
        return _FitSpec(l1_ratio, solver, self.class_weight, self.max_iter, self.tol, self.random_state,
                        path_solver)

    def _grid(self) -> np.ndarray:
        Cs = np.logspace(-2, 2, int(self.Cs)) if np.isscalar(self.Cs) else np.asarray(self.Cs, dtype=float)
        if Cs.size == 0 or (Cs <= 0).any():
            raise OpenCodeError(f"Cs must be positive penalties, got {self.Cs!r}")
        return np.sort(Cs)

    def _prepare(self, X):
        """The matrix as the model sees it: presence or counts, constant columns removed."""
        X = presence(X) if self.binary else sp.csr_matrix(X, dtype=np.float64)
        return X[:, self.kept_]

    # -- fitting --------------------------------------------------------------------------------------------
    def fit(self, X, y, sample_weight=None, *, terms=None, labels: tuple[str, str] = ("0", "1")):
        """Choose C by CV, fit the model, measure stability and quality, and build the ranking table.

        terms: one label per column; labels: names of outcome side 0 and side 1 (used in notes and tables).
        """
        scoring = _SCORINGS.get(self.scoring)
        if scoring is None:
            raise OpenCodeError(f"unknown scoring {self.scoring!r}; choose log_loss or auc")
        spec, Cs = self._spec(), self._grid()
        X, y, w, terms = _check_inputs(X, y, sample_weight, terms)
        self.terms_, self.labels_ = terms, (str(labels[0]), str(labels[1]))
        self.n_features_in_ = X.shape[1]
        self.class_counts_ = (int((y == 0).sum()), int((y == 1).sum()))
        self.warnings_ = []
        small = small_group_warning(*self.class_counts_, self.labels_)
        if small:
            self.warnings_.append(small)
        if min(self.class_counts_) < self.cv:
            raise OpenCodeError(f"{self.cv}-fold cross-validation needs at least {self.cv} verbatims on each "
                                f"side; counts are {self.class_counts_[0]} {self.labels_[0]!r} and "
                                f"{self.class_counts_[1]} {self.labels_[1]!r}")
        base = presence(X) if self.binary else X
        constant = constant_columns(base)
        self.kept_ = ~constant
        self.n_dropped_constant_ = int(constant.sum())
        self.dropped_terms_ = [t for t, c in zip(terms, constant) if c]
        if self.n_dropped_constant_:
            self.warnings_.append(f"{self.n_dropped_constant_} term(s) with zero variance dropped "
                                  f"(present in no verbatim or in all of them)")
        if not self.kept_.any():
            raise OpenCodeError("no term varies across the verbatims; nothing to rank")
        Xk = base[:, self.kept_]
        kept_terms = [t for t, k in zip(terms, self.kept_) if k]

        search = self._search_rows(y)
        Xs, ys, ws = (Xk, y, w) if search is None else (Xk[search], y[search], _weighted(search, w))
        self.search_rows_used_ = len(ys)
        if search is not None:
            self.warnings_.append(
                f"at this scale C was chosen, the cross-validated AUC measured and stability drawn on a stratified "
                f"random {len(ys):,} of the {len(y):,} verbatims; the model and the 2x2 tests use all of them")
        self._cross_validate(spec, Cs, Xs, ys, ws, scoring)
        final = spec.model(self.C_, many=search is not None and spec.l1_ratio == 0.0)
        self.model_ = spec.fit(final, Xk, y, w)
        self.coef_ = np.zeros(self.n_features_in_)
        self.coef_[self.kept_] = self.model_.coef_.ravel()
        self.intercept_ = float(self.model_.intercept_[0])
        self.stability_ = np.zeros(self.n_features_in_)
        self.stability_[self.kept_] = self._stability(spec, Xs, ys, ws)
        self.n_stalled_fits_ = len(spec.stalled)
        if self.n_stalled_fits_:
            self.warnings_.append(
                f"{self.n_stalled_fits_} of the model fits stopped at the iteration limit ({self.max_iter}) before "
                "converging; their coefficients are close to, not at, the optimum (raise max_iter to refit)")
        self._notes(Xk, y, kept_terms)
        self.ranking_ = self._ranking_table(Xk, y, kept_terms)
        return self

    def _search_rows(self, y) -> np.ndarray | None:
        """Rows (sorted) of a stratified random subsample for the C search and stability, or None for all."""
        if self.search_rows is None or len(y) <= self.search_rows:
            return None
        if self.search_rows < 2 * self.cv:
            raise OpenCodeError(f"search_rows={self.search_rows} is too small for {self.cv}-fold cross-validation")
        rng = np.random.default_rng(self.random_state)
        share = self.search_rows / len(y)
        picks = [rng.choice(rows, max(self.cv, round(len(rows) * share)), replace=False)
                 for rows in (np.flatnonzero(y == 0), np.flatnonzero(y == 1))]
        return np.sort(np.concatenate(picks))

    def _cross_validate(self, spec, Cs, X, y, w, scoring):
        folds = list(StratifiedKFold(self.cv, shuffle=True, random_state=self.random_state).split(X, y))
        results = Parallel(n_jobs=self.n_jobs, prefer="threads")(
            delayed(_fold_path)(spec, Cs, X, y, w, train, test, scoring) for train, test in folds)
        scores = np.vstack([s for _, s in results])
        usable = ~np.isnan(scores).any(axis=0)
        mean = np.full(len(Cs), np.nan)
        mean[usable] = scores[:, usable].mean(axis=0)
        best = int(np.nanargmax(mean))
        if self.c_rule == "1se":
            spread = scores[:, best].std(ddof=1) / np.sqrt(len(folds))
            best = int(np.flatnonzero(usable & (mean >= mean[best] - spread))[0])  # Cs ascend: most regularized
        elif self.c_rule != "best":
            raise OpenCodeError(f"unknown c_rule {self.c_rule!r}; choose 1se or best")
        self.Cs_ = Cs
        self.cv_fold_scores_ = scores
        self.cv_scores_ = mean
        self.C_ = float(Cs[best])
        oof = np.empty(y.shape)
        for (_, test), (probs, _) in zip(folds, results):
            oof[test] = probs[:, best]
        self.cv_probabilities_ = oof
        self.cv_auc_ = float(roc_auc_score(y, oof, sample_weight=w))
        self.cv_auc_ci_ = hanley_mcneil_ci(self.cv_auc_, int((y == 1).sum()), int((y == 0).sum()))
        self.cv_log_loss_ = float(log_loss(y, oof, sample_weight=w))

    def _stability(self, spec, X, y, w) -> np.ndarray:
        if self.n_subsamples <= 0:
            return np.full(X.shape[1], np.nan)
        rng = np.random.default_rng(self.random_state)
        by_class = [np.flatnonzero(y == k) for k in (0, 1)]
        draws = [np.sort(np.concatenate([rng.choice(rows, max(1, round(len(rows) * self.subsample_fraction)),
                                                    replace=False) for rows in by_class]))
                 for _ in range(self.n_subsamples)]
        # Same penalty per verbatim as the full fit: scikit-learn's C multiplies a sum over rows.
        C_sub = self.C_ * len(y) / len(draws[0])
        top = self.stability_top if spec.l1_ratio == 0.0 else None
        picks = Parallel(n_jobs=self.n_jobs, prefer="threads")(
            delayed(_subsample_support)(spec, C_sub, X, y, w, rows, top) for rows in draws)
        return np.mean(picks, axis=0)

    def _notes(self, X, y, kept_terms):
        """Quality note (does the text predict the outcome at all) and separation notes."""
        low, high = self.cv_auc_ci_
        if self.cv_auc_ < MIN_USEFUL_AUC or low <= 0.5:
            self.quality_note_ = (
                f"The text barely predicts {self.labels_[1]!r} against {self.labels_[0]!r}: cross-validated "
                f"AUC {self.cv_auc_:.3f} (95% CI {low:.3f} to {high:.3f}). Term rankings here are likely "
                "noise; do not report them as drivers.")
        else:
            self.quality_note_ = ""
        cells = two_by_two(X, y)
        splitters = np.flatnonzero(((cells["b"] == 0) & (cells["c"] == 0)) | ((cells["a"] == 0) & (cells["d"] == 0)))
        self.separation_note_ = ""
        if splitters.size:
            names = ", ".join(repr(kept_terms[j]) for j in splitters[:5])
            self.separation_note_ = (f"perfect separation: {names} alone split(s) the two sides exactly; the "
                                     "penalty keeps coefficients finite, unpenalized odds ratios are infinite")
        else:
            p = self.model_.predict_proba(X)[:, 1]
            if p[y == 1].min() > p[y == 0].max():
                self.separation_note_ = ("perfect separation: together the terms split the two sides exactly in "
                                         "the fitted data; trust the cross-validated figures, not the in-sample fit")
        if self.separation_note_:
            self.warnings_.append(self.separation_note_)

    def _ranking_table(self, X, y, kept_terms) -> pd.DataFrame:
        table = univariate_table(X, y, kept_terms, prior_scale=self.prior_scale)
        coef = self.coef_[self.kept_]
        table.insert(1, "coef", coef)
        table.insert(2, "odds_ratio", np.exp(coef))
        table.insert(3, "direction", np.select([coef > 0, coef < 0], list(self.labels_[::-1]), ""))
        table.insert(4, "stability", self.stability_[self.kept_])
        table.insert(5, "docs", table["docs_1"] + table["docs_0"])
        return table

    # -- using the fit --------------------------------------------------------------------------------------
    def ranking(self, sort_by: str = "stability", ascending: bool = False) -> pd.DataFrame:
        """The ranking table sorted by any column; ties broken by |Monroe z| (evidence), largest first."""
        table = self.ranking_
        if sort_by not in table.columns:
            raise OpenCodeError(f"cannot sort by {sort_by!r}; columns are {', '.join(table.columns)}")
        keyed = table.assign(_strength=table["monroe_z"].abs())
        return (keyed.sort_values([sort_by, "_strength"], ascending=[ascending, False], kind="stable")
                .drop(columns="_strength").reset_index(drop=True))

    def top_terms(self, side: int, n: int = 15) -> pd.DataFrame:
        """The n terms pushing towards side 1 (positive coef) or side 0 (negative): most stable, then most evidence."""
        if side not in (0, 1):
            raise OpenCodeError(f"side must be 0 or 1, got {side!r}")
        table = self.ranking("stability")
        pushed = table[table["coef"] > 0] if side == 1 else table[table["coef"] < 0]
        return pushed.head(n).reset_index(drop=True)

    def decision_function(self, X) -> np.ndarray:
        """Log-odds of side 1 for new verbatims (same term columns as in fit)."""
        return self.model_.decision_function(self._prepare(self._same_columns(X)))

    def predict_proba(self, X) -> np.ndarray:
        """Probabilities of side 0 and side 1 for new verbatims."""
        return self.model_.predict_proba(self._prepare(self._same_columns(X)))

    def _same_columns(self, X):
        X = sp.csr_matrix(X)
        if X.shape[1] != self.n_features_in_:
            raise OpenCodeError(f"the matrix has {X.shape[1]} term columns; the model was fitted on "
                                f"{self.n_features_in_}")
        return X

    def score_holdout(self, X, y, sample_weight=None) -> dict:
        """AUC (with Hanley-McNeil 95% CI) and log-loss on a held-out set; also kept in holdout_."""
        X, y, w, _ = _check_inputs(X, y, sample_weight, self.terms_)
        p = self.predict_proba(X)[:, 1]
        auc = float(roc_auc_score(y, p, sample_weight=w))
        self.holdout_ = {"n": int(y.size), "auc": auc,
                         "auc_ci": hanley_mcneil_ci(auc, int(y.sum()), int((y == 0).sum())),
                         "log_loss": float(log_loss(y, p, sample_weight=w, labels=[0, 1]))}
        return self.holdout_


# -- unpenalized refit, indicators, text table -------------------------------------------------------------------
@dataclass(frozen=True)
class UnpenalizedFit:
    """Maximum-likelihood odds ratios with Wald 95% CIs for chosen terms, and a note on anything left out."""

    table: pd.DataFrame
    intercept: float
    note: str


def _column_indices(terms, chosen) -> list[int]:
    position = {t: j for j, t in enumerate(terms)}
    missing = [t for t in chosen if t not in position]
    if missing:
        raise OpenCodeError(f"term {missing[0]!r} is not in the term list")
    return [position[t] for t in chosen]


def unpenalized_odds_ratios(X, y, terms, chosen, sample_weight=None, *, binary: bool = True,
                            level: float = 0.95) -> UnpenalizedFit:
    """Refit the chosen terms without a penalty; SEs from the inverse Fisher information (Wald CIs).

    Terms that separate the outcome (present on one side only) have no finite estimate: they are left out
    of the fit, shown with an infinite or zero odds ratio, and named in the note. Weights are treated as
    frequency weights for the standard errors (no design effect).
    """
    X, y, w, terms = _check_inputs(X, y, sample_weight, terms)
    chosen = list(dict.fromkeys(chosen))
    if not chosen:
        raise OpenCodeError("choose at least one term for the odds-ratio refit")
    columns = _column_indices(terms, chosen)
    Z = presence(X[:, columns]) if binary else X[:, columns]
    cells = two_by_two(Z, y)
    constant = constant_columns(Z)
    separated = ((cells["a"] == 0) | (cells["b"] == 0)) & ~constant
    usable = ~separated & ~constant
    notes = []
    if constant.any():
        notes.append("zero variance, left out: " + ", ".join(repr(t) for t, c in zip(chosen, constant) if c))
    if separated.any():
        notes.append("perfect separation (present on one side only; the estimate is infinite), left out: "
                     + ", ".join(repr(t) for t, s in zip(chosen, separated) if s))
    coef = np.where(separated, np.where(cells["a"] > 0, np.inf, -np.inf), np.nan)
    se = np.full(len(chosen), np.nan)
    intercept = np.nan
    if usable.any():
        D = Z[:, usable].toarray()
        model = make_logistic(np.inf, 0.0, "newton-cholesky", tol=1e-10, max_iter=1000)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            model.fit(D, y, sample_weight=w)
        p = model.predict_proba(D)[:, 1]
        design = np.column_stack([np.ones(len(y)), D])
        weight = p * (1 - p) * (1.0 if w is None else w)
        information = design.T @ (design * weight[:, None])
        coef[usable] = model.coef_.ravel()
        intercept = float(model.intercept_[0])
        if np.abs(y - p).max() < 1e-6 or np.linalg.cond(information) > 1e12:
            notes.append("the chosen terms separate the outcome or are collinear; standard errors are not "
                         "available")
        else:
            se[usable] = np.sqrt(np.diag(np.linalg.inv(information))[1:])
    z = stats.norm.ppf(0.5 + level / 2)
    table = pd.DataFrame({"term": chosen, "coef": coef, "se": se, "odds_ratio": np.exp(coef),
                          "or_low": np.exp(coef - z * se), "or_high": np.exp(coef + z * se),
                          "p": 2 * stats.norm.sf(np.abs(coef / se))})
    return UnpenalizedFit(table=table, intercept=intercept, note="; ".join(notes))


def term_indicators(X, terms, chosen) -> pd.DataFrame:
    """0/1 columns, one per chosen term: does each verbatim contain it (for storing as new variables)."""
    columns = _column_indices([str(t) for t in terms], list(chosen))
    P = presence(sp.csr_matrix(X)[:, columns])
    return pd.DataFrame(P.toarray().astype(np.int8), columns=list(chosen))


def _or_text(value: float) -> str:
    """An odds ratio for a table: two decimals (three significant figures past 100), 'inf' for infinite."""
    if not np.isfinite(value):
        return "-" if np.isnan(value) else ("inf" if value > 0 else "0")
    return f"{value:.2f}" if value < 100 else f"{value:.0f}"


def _or_interval_text(value: float, low: float, high: float) -> str:
    """'OR [low, high]' with the interval's limits, or the OR alone when there is no interval."""
    if not (np.isfinite(low) or np.isfinite(high)):
        return _or_text(value)
    return f"{_or_text(value)} [{_or_text(low)}, {_or_text(high)}]"


def format_ranking_table(table: pd.DataFrame, term_column: str = "term", *, sides: Sequence[str] | None = None,
                         wide: bool = False, note: str | None = None, width: int | None = None) -> str:
    """Ranking rows as a text table fitted to the width: the term, the side it leans to, the odds ratio of its
    2x2 table with its 95% interval, q, the verbatims on each side and the stability; `wide` adds the penalized
    model's coefficient and odds ratio and the Monroe et al. z.

    `sides` (the labels of outcome 0 and 1) factors the side labels into the header: the column shows 0 or 1
    and a line above the table says which side each is.
    """
    from opencode.files.textout import format_p, format_table

    side_of = {label: str(code) for code, label in enumerate(sides)} if sides else {}
    has_interval = {"uni_or_low", "uni_or_high"} <= set(table.columns)
    rows = []
    for row in table.to_dict("records"):
        odds = (_or_interval_text(row["uni_or"], row["uni_or_low"], row["uni_or_high"]) if has_interval
                else _or_text(row["uni_or"]))
        cells = [row[term_column], side_of.get(row["direction"], row["direction"]), odds, format_p(row["q"]),
                 int(row["docs_1"]), int(row["docs_0"]), f"{row['stability']:.2f}"]
        if wide:
            cells += [f"{row['coef']:+.3f}", _or_text(row["odds_ratio"]), f"{row['monroe_z']:+.2f}"]
        rows.append(cells)
    headers = ["term", "side" if sides else "leans to", "OR [95% CI]" if has_interval else "uni OR", "q", "n1",
               "n0", "stab"] + (["coef", "model OR", "z"] if wide else [])
    align = "l" + ("r" if sides else "l") + "rrrrr" + ("rrr" if wide else "")
    title = None
    if sides:
        title = f"side 1 = {sides[1]}\nside 0 = {sides[0]}"
    return format_table(headers, rows, align=align, width=width, wrap=[0] + ([] if sides else [1]), title=title,
                        note=note)


def format_ranking(ranker: DriverRanker, n: int = 20, sort_by: str = "stability", force: bool = False) -> str:
    """Plain-text ranking for the terminal: quality line, warnings, then the top n rows (or the quality note)."""
    lines = [f"outcome: {ranker.labels_[1]} (n={ranker.class_counts_[1]}) vs {ranker.labels_[0]} "
             f"(n={ranker.class_counts_[0]}); C={ranker.C_:.3g}; CV AUC {ranker.cv_auc_:.3f} "
             f"(95% CI {ranker.cv_auc_ci_[0]:.3f}-{ranker.cv_auc_ci_[1]:.3f}), log-loss {ranker.cv_log_loss_:.3f}"]
    if getattr(ranker, "holdout_", None):
        lines.append(f"held-out: AUC {ranker.holdout_['auc']:.3f}, log-loss {ranker.holdout_['log_loss']:.3f} "
                     f"(n={ranker.holdout_['n']})")
    lines += [f"warning: {text}" for text in ranker.warnings_]
    if ranker.quality_note_:
        lines.append(ranker.quality_note_)
        if not force:
            return "\n".join(lines)
    lines.append(format_ranking_table(ranker.ranking(sort_by).head(n), sides=list(ranker.labels_),
                                      note=f"sorted by {sort_by}"))
    lines.append("side: the outcome the term leans to in the penalized model; OR [95% CI], q: the term's 2x2 "
                 "table (q Benjamini-Hochberg); stab: share of half-sample fits selecting the term")
    return "\n".join(lines)
