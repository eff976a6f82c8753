"""Agreement on a study's question: the coders' codes as a CodingMatrix, then the agreement measures.

The study-level door to this package (`question_agreement`); the coders' codes come from coding.reliability.
"""

from __future__ import annotations

from collections.abc import Sequence

from opencode.analysis.agreement.core import AgreementResult, CodingMatrix, measure_agreement
from opencode.coding.reliability import code_labels, coder_sets
from opencode.study import assignments_store as astore
from opencode.study import survey_data
from opencode.study.store import Study


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


def question_agreement(study: Study, question: str, coders: str | Sequence[str], sample: str | None = None, *,
                    n_resamples: int = 1000, random_state: int | None = 0, confidence: float = 0.95,
                    top: int = 10) -> AgreementResult:
    """Agreement between coders on a question (per code and across the frame), with the frame's labels."""
    matrix = coding_matrix(study, question, coders, sample)
    return measure_agreement(matrix, code_labels=code_labels(study, question), n_resamples=n_resamples,
                             confidence=confidence, random_state=random_state, top=top)
