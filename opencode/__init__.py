"""oecode (import package `opencode`): a workbench for coding open-ended survey answers.

The public Python API, for notebooks and scripts; one import is enough:

    import opencode as oc
    study = oc.open_study("wrenfield.study")
    study.codes("why", coder="final")              # respondent, code, label, net, source
    oc.tables(study, "why", banners=["support"]).to_frame()
    oc.agreement(study, "why", coders=["ash", "bryn"]).to_frame()
    oc.themes(study, "why", k=8).to_frame()
    oc.drivers(study, "why", outcome="support", split="top2").to_frame()

Every name is imported on first use (PEP 562), so `import opencode` and the `oecode` command start instantly.
"""

from __future__ import annotations

from typing import Any

from opencode.version import __version__

__all__ = ["open_study", "themes", "drivers", "agreement", "tables", "OpenCodeError", "__version__"]


def open_study(location: str | Any):
    """Open a study: a `.study` file path (a PostgreSQL address too, where the team store is installed)."""
    from opencode.study.store import Study

    return Study.open(location)


def themes(study, question: str, *, k: int = 10, save: bool = False, **options: Any):
    """Themes of a question's verbatims (NMF by default); the result's `.to_frame()` lists them.

    Unlike `oecode themes`, the run is kept in the study only with `save=True`.
    """
    from opencode.analysis.themes.study import question_themes

    return question_themes(study, question, k=k, save=save, **options)


def drivers(study, question: str, outcome: str, **options: Any):
    """Terms ranked by how they predict a closed-ended outcome; `.to_frame()` gives the ranked table."""
    from opencode.analysis.drivers.study import question_drivers

    return question_drivers(study, question, outcome, **options)


def agreement(study, question: str, coders, *, sample: str | None = None, **options: Any):
    """Agreement between coders (kappa, alpha, AC1 with intervals); `.to_frame()` gives one row per code."""
    from opencode.analysis.agreement.study import question_agreement

    return question_agreement(study, question, coders, sample, **options)


def tables(study, question: str, banners=(), **options: Any):
    """Code frequencies (and codes by banners with tests); `.to_frame()` gives one row per code and net."""
    from opencode.analysis.tables.study import question_tables

    return question_tables(study, question, list(banners), **options)


def __getattr__(name: str):
    if name == "OpenCodeError":
        from opencode.errors import OpenCodeError

        return OpenCodeError
    raise AttributeError(f"module 'opencode' has no attribute {name!r}")
