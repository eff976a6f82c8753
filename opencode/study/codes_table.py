"""One coder's codes on a question as a long table keyed by the survey's respondent id (for notebooks)."""

from __future__ import annotations

import pandas as pd

from opencode.errors import BadInput
from opencode.study.store import read_frame

_CODES_SQL = """
SELECT r.key AS respondent, c.number AS code, c.label AS label, n.number AS net, a.source AS source
FROM assignments a
JOIN verbatims v ON v.id = a.verbatim_id
JOIN respondents r ON r.id = v.respondent_id
JOIN codes c ON c.id = a.code_id
LEFT JOIN codes n ON n.id = c.net_id
WHERE v.question_id = ? AND a.coder = ?
ORDER BY r.id, c.number
"""


def question_codes(study, question: str, coder: str = "final") -> pd.DataFrame:
    """Columns respondent, code, label, net (the net's number or missing), source (hand, rule, machine).

    Respondent ids are the survey's own: whole numbers when the survey's id column was numeric, else text.
    """
    row = study._db.execute("SELECT id, kind FROM variables WHERE name = ?", (question,)).fetchone()
    if row is None or row[1] != "text":
        raise BadInput(f"{study.path}: no open question named {question!r}")
    table = read_frame(study, _CODES_SQL, (row[0], coder))
    id_kind = study._db.execute("SELECT kind FROM variables WHERE role = 'id'").fetchone()
    if id_kind is not None and id_kind[0] == "numeric" and len(table):
        numbers = pd.to_numeric(table["respondent"], errors="coerce")
        if numbers.notna().all() and (numbers == numbers.round()).all():
            table["respondent"] = numbers.astype("int64")
    table["code"] = table["code"].astype("int64")
    table["net"] = table["net"].astype("Int64")
    return table
