"""Stemmers from nltk (no data download needed) and the language names they accept."""

from __future__ import annotations

from collections.abc import Callable

from opencode.errors import OpenCodeError

STEMMERS = ("snowball", "porter")

# ISO 639-1 codes for the Snowball languages (and the file suffix of bundled stop lists).
LANGUAGE_CODES = {
    "arabic": "ar", "danish": "da", "dutch": "nl", "english": "en", "finnish": "fi", "french": "fr",
    "german": "de", "hungarian": "hu", "italian": "it", "norwegian": "no", "portuguese": "pt",
    "romanian": "ro", "russian": "ru", "spanish": "es", "swedish": "sv",
}
_NAMES_BY_CODE = {code: name for name, code in LANGUAGE_CODES.items()}
#: The languages nltk's SnowballStemmer stems (its `languages` less "porter"; a test holds them equal). Written
#: out so that naming a language does not import nltk, whose package import costs a command seconds.
SNOWBALL_LANGUAGES: tuple[str, ...] = tuple(LANGUAGE_CODES)


def language_name(language: str) -> str:
    """The lower-case language name for a name or ISO code ('en' -> 'english'); unknown names pass through."""
    lang = language.strip().lower()
    return _NAMES_BY_CODE.get(lang, lang)


def language_code(language: str) -> str:
    """The ISO code for a language name or code; unknown languages give their lower-case name."""
    name = language_name(language)
    return LANGUAGE_CODES.get(name, name)


def make_stemmer(language: str, stemmer: str | None) -> Callable[[str], str] | None:
    """The stem function for a language ('porter' follows Porter 1980 exactly); None means unstemmed."""
    if stemmer is None:
        return None
    name = language_name(language)
    if stemmer not in STEMMERS:
        raise OpenCodeError(f"unknown stemmer {stemmer!r}: choose one of {', '.join(STEMMERS)} or none")
    if stemmer == "porter":
        if name != "english":
            raise OpenCodeError(
                f"the Porter stemmer is for English only, not {language!r}: use stemmer 'snowball' "
                f"for {', '.join(SNOWBALL_LANGUAGES)}"
            )
        from nltk.stem import PorterStemmer
        return PorterStemmer(mode=PorterStemmer.ORIGINAL_ALGORITHM).stem
    if name not in SNOWBALL_LANGUAGES:
        raise OpenCodeError(
            f"no stemmer for language {language!r}; stemmers exist for: {', '.join(SNOWBALL_LANGUAGES)}. "
            "Choose one of these, or switch stemming off (stemmer none) to analyse unstemmed words."
        )
    from nltk.stem import SnowballStemmer
    return SnowballStemmer(name).stem
