"""Sentiment of verbatims: a lexicon-and-rules score (VADER) per verbatim, stored as closed variables."""
