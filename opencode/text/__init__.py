"""Text analysis: the analyzer, lexicons, term matrices, top terms, kwic, phrase and variant suggestions.

Other parts of opencode start from `term_matrix(study, question)` (cached in the study) and
`analyzer_for(study, question)`; the rest works on plain lists of texts.
"""

from opencode.text.analyzer import Analyzer
from opencode.text.kwic import format_kwic, kwic
from opencode.text.lexicon import Lexicon
from opencode.text.matrix import TermMatrix, build_matrix, cache_key
from opencode.text.spelling_variants import format_variants, suggest_variants
from opencode.text.phrases import format_phrase_suggestions, suggest_phrases
from opencode.text.study_text import analyzer_for, get_lexicon, term_matrix
from opencode.text.words import format_top_terms, top_terms

__all__ = [
    "Analyzer", "Lexicon", "TermMatrix", "analyzer_for", "build_matrix", "cache_key", "format_kwic",
    "format_phrase_suggestions", "format_top_terms", "format_variants", "get_lexicon", "kwic",
    "suggest_phrases", "suggest_variants", "term_matrix", "top_terms",
]
