"""Agreement on a study's question: the coders' codes as a CodingMatrix (or scale ratings), then the measures.

The study-level door to this package (`question_agreement`); the coders' codes come from coding.reliability.
A question whose codes form an ordered scale remembers its level (`remember_level`), so the report and a
later `oecode agree` use the statistics of that level.
"""

from __future__ import annotations

from collections.abc import Sequence

from opencode.analysis.agreement.core import AgreementResult, CodingMatrix, measure_agreement
from opencode.analysis.agreement.scale import (
    DEFAULT_WEIGHTS,
    SCALE_LEVELS,
    ScaleAgreementResult,
    ScaleRatings,
    measure_scale_agreement,
)
from opencode.analysis.agreement.verdict import ALPHA_BAR, KAPPA_BAR, LEFT_OUT_SPECIALS
from opencode.coding.frames import load_frame
from opencode.coding.reliability import code_labels, coder_sets
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import survey_data
from opencode.study.store import Study

LEVEL_SETTING = "agreement-level:"
LEVELS = ("nominal",) + SCALE_LEVELS


def coding_matrix(study: Study, question: str, coders: str | Sequence[str], sample: str | None = None
                  ) -> CodingMatrix:
    """The agreement library's CodingMatrix for the question: units are respondent ids, codes the frame's codes
    (nets left out), restricted to a sample when given, else every verbatim coded by any of the coders."""
    sets = coder_sets(study, question, coders, sample)
    labels = code_labels(study, question)
    question_id = survey_data.get_question(study, question).id
    keys = {v: k for k, v in astore.verbatim_ids_by_respondent(study, question_id).items()}
    rows = [(keys[v], coder, number) for coder, coded in sets.items() for v, numbers in coded.items()
            for number in sorted(numbers)]
    coded = {coder: [keys[v] for v in coded] for coder, coded in sets.items()}
    return CodingMatrix.from_assignments(rows, coded, coders=list(sets), codes=sorted(labels))


def scale_ratings(study: Study, question: str, coders: str | Sequence[str], sample: str | None = None,
                  scale: Sequence[int] | None = None) -> ScaleRatings:
    """The coders' codes on the scale (default: every code of the frame, by number) per respondent id."""
    sets = coder_sets(study, question, coders, sample)
    labels = code_labels(study, question)
    scale = sorted(labels) if not scale else [int(c) for c in scale]
    unknown = [c for c in scale if c not in labels]
    if unknown:
        raise OpenCodeError(f"question {question!r}: the frame has no code {unknown[0]} for the scale "
                            f"(codes: {', '.join(map(str, sorted(labels))) or 'none'})")
    question_id = survey_data.get_question(study, question).id
    keys = {v: k for k, v in astore.verbatim_ids_by_respondent(study, question_id).items()}
    by_key = {coder: {keys[v]: frozenset(numbers) for v, numbers in coded.items()} for coder, coded in sets.items()}
    return ScaleRatings.from_sets(by_key, scale, {c: labels[c] for c in scale})


def special_codes(study: Study, question: str) -> dict[int, str]:
    """The frame's codes left out of the agreement headline by default (non-answer and don't know), by number."""
    return {c.number: c.special for c in load_frame(study, question).codes
            if not c.is_net and c.special in LEFT_OUT_SPECIALS}


def remember_level(study: Study, question: str, level: str, weights: str | None = None,
                   scale: Sequence[int] | None = None, actor: str = "oecode") -> None:
    """Store the question's level of measurement (and scale weights and codes) for later agreement runs."""
    survey_data.get_question(study, question)
    if level not in LEVELS:
        raise OpenCodeError(f"level must be one of {', '.join(LEVELS)}; got {level!r}")
    study.set_setting(LEVEL_SETTING + question, {"level": level, "weights": weights,
                                                 "scale": [int(c) for c in scale] if scale else None}, actor=actor)


def agreement_level(study: Study, question: str) -> dict:
    """The stored level settings of a question ({'level', 'weights', 'scale'}); nominal when none is stored."""
    stored = study.get_setting(LEVEL_SETTING + question)
    return dict(stored) if stored else {"level": "nominal", "weights": None, "scale": None}


def question_agreement(study: Study, question: str, coders: str | Sequence[str], sample: str | None = None, *,
                       n_resamples: int = 1000, random_state: int | None = 0, confidence: float = 0.95,
                       top: int = 10, level: str | None = None, weights: str | None = None,
                       scale: Sequence[int] | None = None, include_special: bool = False,
                       kappa_bar: float = KAPPA_BAR, alpha_bar: float = ALPHA_BAR,
                       ) -> AgreementResult | ScaleAgreementResult:
    """Agreement between coders on a question: per code and across the frame (nominal), or on the code scale at
    an ordinal, interval or ratio level. Level, weights and scale default to the question's stored ones.

    Nominal results rank the codes least to most reliable, flag those whose interval reaches under `kappa_bar`
    or `alpha_bar`, and leave the frame's non-answer and don't-know codes out of the headline mean unless
    `include_special`."""
    stored = agreement_level(study, question)
    level = level or stored["level"]
    if level not in LEVELS:
        raise OpenCodeError(f"level must be one of {', '.join(LEVELS)}; got {level!r}")
    if level == "nominal":
        if weights not in (None, "identity"):
            raise OpenCodeError("weights give credit for near misses on an ordered scale; name the level too "
                                "(--level ordinal or interval)")
        matrix = coding_matrix(study, question, coders, sample)
        return measure_agreement(matrix, code_labels=code_labels(study, question), n_resamples=n_resamples,
                                 confidence=confidence, random_state=random_state, top=top,
                                 special_codes=special_codes(study, question), include_special=include_special,
                                 kappa_bar=kappa_bar, alpha_bar=alpha_bar)
    same_level = stored["level"] == level
    weights = weights or (stored["weights"] if same_level else None) or DEFAULT_WEIGHTS[level]
    scale = scale or (stored["scale"] if same_level else None)
    ratings = scale_ratings(study, question, coders, sample, scale)
    return measure_scale_agreement(ratings, level=level, weights=weights, n_resamples=n_resamples,
                                   confidence=confidence, random_state=random_state)
