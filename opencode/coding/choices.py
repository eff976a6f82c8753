"""The fixed choices of the coding functions that the command line offers (a light module: `oecode ... --help`
reads it without loading the coding code)."""

#: assignments: the coder name of the adjudicated codes; reliability: the machine coder's name as a coder.
FINAL = "final"
MACHINE = "machine"
#: import_codes: how a survey file holds existing codes.
LAYOUTS = ("auto", "delimited", "flags", "mentions", "long")
#: import_codes: what a blank code cell on an answered verbatim means.
BLANK_MEANINGS = ("uncoded", "no-code")
#: import_codes: where a cell of several codes is split unless a delimiter is given: at any of these characters.
DEFAULT_DELIMITERS = ",;|"
#: done_marks: which verbatims a call acts on.
FILTERS = {
    "answered-without-codes": "answered verbatims (not non-answers) that hold no code of the coder",
    "without-codes": "verbatims that hold no code of the coder (non-answers included)",
    "with-codes": "verbatims that hold a code of the coder",
    "non-answers": "verbatims flagged as non-answers",
    "all": "every verbatim of the question",
}
#: frames: the kinds of frame entries and the special meanings a code can carry.
KINDS = ("code", "net")
SPECIALS = ("nonanswer", "other", "dontknow")
