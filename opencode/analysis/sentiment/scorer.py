"""Score verbatims with VADER (Hutto & Gilbert 2014, ICWSM), the `vaderSentiment` package and its lexicon.

What we add to the package as it is, each for a reason a survey verbatim gives:
- sentence by sentence, then the mean of the sentence compound scores: VADER's rules (negation window,
  "but", capitals, punctuation) are written for one sentence, and its authors advise scoring paragraphs
  by sentence (the package's README, from memory); on the public food reviews this lifts the AUC from
  0.73 to 0.77 (bench/bench_sentiment.py);
- the study's negation cues (opencode.text.tokenize.NEGATIONS: "nobody", contractions typed without an
  apostrophe) beside VADER's own, and curly apostrophes read as straight ones, so "don’t like" typed on a
  phone is negated like "don't like";
- a verbatim whose words are mostly another language's function words (the bundled stop lists) is not
  scored ("not scored: looks like LANG") instead of getting a neutral 0 from a lexicon that cannot read it.

Categories from the compound score with the package's documented cut points (common practice): positive
at or above +0.05, negative at or below -0.05, neutral between.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from opencode.errors import OpenCodeError
from opencode.text.stemming import language_code, language_name
from opencode.text.stoplists import bundled_stop_words
from opencode.text.tokenize import is_negation

LANGUAGES = ("en",)  # languages with a sentiment lexicon (VADER's is English)
DEFAULT_CUT = 0.05  # the package's documented threshold (common practice)
NEGATIVE, NEUTRAL, POSITIVE, NOT_SCORED = 1.0, 2.0, 3.0, 9.0
CATEGORY_LABELS = {NEGATIVE: "negative", NEUTRAL: "neutral", POSITIVE: "positive", NOT_SCORED: "not scored"}
_SENTENCE = re.compile(r"(?<=[.!?])\s+|<br\s*/?>|[\r\n]+")
_WORD = re.compile(r"[^\W\d_]+(?:['’][^\W\d_]+)*")
_OTHER_LANGUAGES = ("de", "es", "fr", "nl")  # bundled stop lists used to spot a verbatim in another language


def sentiment_available(language: str) -> bool:
    """Whether verbatims in this language (name or ISO code) can be scored."""
    return language_code(language) in LANGUAGES


def check_language(language: str) -> None:
    """Raise a clear error for a language without a sentiment lexicon (never score it wrongly)."""
    if not sentiment_available(language):
        raise OpenCodeError(
            f"sentiment scoring is not available for {language_name(language)} ({language_code(language)}): the "
            "VADER lexicon is English only, and scoring other text with it would give wrong (mostly neutral) "
            "scores; nothing was scored")


def _analyzer_class():
    """VADER's analyzer with the study's negation cues added to its own (imported when first needed)."""
    from vaderSentiment import vaderSentiment as vader

    class StudyNegationAnalyzer(vader.SentimentIntensityAnalyzer):
        @staticmethod
        def _negation_check(valence, words_and_emoticons, start_i, i):
            valence = vader.SentimentIntensityAnalyzer._negation_check(valence, words_and_emoticons, start_i, i)
            word = str(words_and_emoticons[i - (start_i + 1)]).lower()
            if is_negation(word) and not vader.negated([word]):
                if not (start_i > 0 and word == "without" and "doubt" in map(str.lower, words_and_emoticons[i - start_i:i])):
                    valence = valence * vader.N_SCALAR
            return valence

    return StudyNegationAnalyzer


@dataclass(frozen=True)
class SentimentScores:
    """Per verbatim: compound score (-1..1), VADER's negative / neutral / positive shares, the category code
    (1 negative, 2 neutral, 3 positive, 9 not scored) and why a verbatim was not scored ('' when scored)."""

    compound: np.ndarray
    negative: np.ndarray
    neutral: np.ndarray
    positive: np.ndarray
    category: np.ndarray
    reason: tuple[str, ...]

    @property
    def n_scored(self) -> int:
        """How many verbatims got a score."""
        return int(np.isfinite(self.compound).sum())


class SentimentScorer:
    """Lexicon-and-rules sentiment for verbatims (estimator-style: parameters in __init__, `score` is pure).

    language: the verbatims' language (only English has a lexicon); cut: compound scores at or beyond +-cut
    are positive / negative; by_sentence: average the sentence scores (else score the whole verbatim as the
    package does); check_language: leave verbatims that read as another bundled language unscored.
    """

    def __init__(self, language: str = "english", cut: float = DEFAULT_CUT, by_sentence: bool = True,
                 check_language: bool = True) -> None:
        self.language = language
        self.cut = cut
        self.by_sentence = by_sentence
        self.check_language = check_language
        self._analyzer = None

    def _vader(self):
        if self._analyzer is None:
            check_language(self.language)
            if not 0 <= self.cut < 1:
                raise OpenCodeError(f"sentiment cut point must be from 0 to below 1, got {self.cut:g}")
            self._analyzer = _analyzer_class()()
            self._stop = {code: bundled_stop_words(code) for code in ("en",) + _OTHER_LANGUAGES}
        return self._analyzer

    def other_language(self, text: str) -> str:
        """The bundled language a verbatim reads as when not English ('' when English or unsure)."""
        words = [w.lower().replace("’", "'") for w in _WORD.findall(text)]
        if len(words) < 2:
            return ""
        english = sum(w in self._stop["en"] for w in words)
        best, hits = "", english
        for code in _OTHER_LANGUAGES:
            found = sum(w in self._stop[code] for w in words)
            if found > hits and found >= 2:
                best, hits = code, found
        return best

    def polarity(self, text: str) -> dict[str, float]:
        """VADER's four scores for one text (by sentence when asked)."""
        vader = self._vader()
        text = text.replace("’", "'")
        if not self.by_sentence:
            return vader.polarity_scores(text)
        sentences = [s for s in _SENTENCE.split(text) if s and s.strip()] or [text]
        scores = [vader.polarity_scores(s) for s in sentences]
        return {k: float(np.mean([s[k] for s in scores])) for k in ("neg", "neu", "pos", "compound")}

    def score(self, texts: Sequence[str | None]) -> SentimentScores:
        """Score every text; empty texts and texts in another language are not scored (NaN, category 9)."""
        self._vader()
        n = len(texts)
        out = {k: np.full(n, np.nan) for k in ("neg", "neu", "pos", "compound")}
        category = np.full(n, NOT_SCORED)
        reasons = []
        for i, text in enumerate(texts):
            text = "" if text is None else str(text)
            if not text.strip():
                reasons.append("empty")
                continue
            other = self.other_language(text) if self.check_language else ""
            if other:
                reasons.append(f"not English (reads like {language_name(other)})")
                continue
            scores = self.polarity(text)
            for key in out:
                out[key][i] = scores[key]
            c = scores["compound"]
            category[i] = POSITIVE if c >= self.cut else NEGATIVE if c <= -self.cut else NEUTRAL
            reasons.append("")
        return SentimentScores(out["compound"], out["neg"], out["neu"], out["pos"], category, tuple(reasons))
