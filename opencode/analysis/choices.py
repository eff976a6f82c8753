"""The fixed choices and defaults of the analyses that the command line offers, in a light module so that
`oecode VERB --help` loads no analysis code; the analysis modules import them from here."""

#: the codes' level of measurement (agreement.study.LEVELS derives the same from the scale levels it computes).
AGREEMENT_LEVELS = ("nominal", "ordinal", "interval", "ratio")
#: a code is flagged when its interval reaches under either bar (agreement.verdict).
AGREEMENT_KAPPA_BAR = 0.60  # Landis & Koch (1977): above 0.60 reads "substantial"
AGREEMENT_ALPHA_BAR = 0.667  # Krippendorff (2004): the lowest alpha for tentative conclusions
#: themes: keep terms found in at least this many verbatims.
THEMES_MIN_DF = 2
#: tables: the files tables are written as.
TABLE_SUFFIXES = (".csv", ".xlsx", ".html")
#: themes: the paragraph on short verbatims, min_df and phrases.
SHORT_TEXT_NOTE = (
    "Themes from short verbatims. Most answers hold 3 to 30 words, so each verbatim gives a theme finder "
    "only a handful of terms, and two answers about the same thing often share no word at all. Two lexicon "
    "settings therefore move the themes more than the choice of method. min_df (the fewest verbatims a term "
    "must appear in) removes typos and one-off words: raising it gives cleaner, more general themes and more "
    "verbatims left with no terms (these are counted, not themed), while lowering it lets rare words and "
    "misspellings form small, hard-to-read themes. Merged phrases (for example 'opening hours' or 'self "
    "service' as one term) keep a two-word idea together: a theme then shows the phrase instead of its "
    "separate words, verbatims that use it are pulled into the same theme, and fewer spurious themes are "
    "built from common words that only mean something in a pair. Re-run the k search after changing either "
    "setting; reading the themes and their verbatims stays the final test."
)
