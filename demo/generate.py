"""Generate the invented Wrenfield library-hours survey: data, labels, .sav, code frames, double coding.

Everything here is made up for the demo. Respondents get closed-ended answers from a small latent model
(age, children, shift work, safety worry, neighbourhood), then one to three true codes per open question,
and each verbatim is written from phrase templates for those codes with realistic mess added (typos, case,
emoji, non-answers, other languages, duplicates, contact details). The same seed gives byte-identical files.

Run `python -m opencode.demo.generate --out DIR` or call `generate_demo(out_dir, seed=2026)`.
"""

from __future__ import annotations

import argparse
import csv
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError
from opencode.files.safe_write import atomic_open, atomic_path

DEFAULT_SEED = 2026
DEFAULT_RESPONDENTS = 2400
FILES = (
    "wrenfield.csv",
    "wrenfield-labels.csv",
    "wrenfield.sav",
    "frame-why.csv",
    "frame-improve.csv",
    "double-coded.csv",
)
COLUMNS = ("resp_id", "support", "why", "improve", "age_band", "neighbourhood", "visits_month", "children", "weight")
QUESTIONS = ("why", "improve")
CODERS = ("ash", "bryn")
DOUBLE_CODED = 300

NEIGHBOURHOODS = ("Wrenfield Centre", "Pellow Hill", "Saltmarrow", "Quillwater", "Tansy Fields")
AGE_BANDS = ("16-24", "25-34", "35-44", "45-59", "60-74", "75+")
SUPPORT_LABELS = {1: "Strongly oppose", 2: "Oppose", 3: "Neither support nor oppose", 4: "Support",
                  5: "Strongly support", 9: "Refused"}

VARIABLE_LABELS = {
    "resp_id": "Respondent ID",
    "support": "Support for opening library branches until 22:00 with self-service access after 18:00",
    "why": "Why do you say that?",
    "improve": "What one change would most improve your library?",
    "age_band": "Age band",
    "neighbourhood": "Neighbourhood",
    "visits_month": "Library visits in a typical month",
    "children": "Children under 16 living at home",
    "weight": "Survey weight (raked to age, neighbourhood and children)",
}
VALUE_LABELS = {
    "support": SUPPORT_LABELS,
    "age_band": {i + 1: band for i, band in enumerate(AGE_BANDS)},
    "neighbourhood": {i + 1: name for i, name in enumerate(NEIGHBOURHOODS)},
    "visits_month": {99: "Don't know"},
    "children": {1: "Yes", 2: "No"},
}
MISSING_CODES = {"support": [9], "visits_month": [99]}
SAV_TIMESTAMP = (b"01 Jan 26", b"00:00:00")
SAV_DATE_OFFSET = 92

FRAME_COLUMNS = ("number", "label", "kind", "net", "hotkey", "description", "include", "exclude", "special")


@dataclass(frozen=True)
class Code:
    """One row of a code frame: a code or a net."""

    number: int
    label: str
    hotkey: str = ""
    net: int | None = None
    description: str = ""
    include: str = ""
    exclude: str = ""
    special: str = ""
    kind: str = "code"


@dataclass(frozen=True)
class QuestionSpec:
    """Everything needed to write and code one open question."""

    name: str
    frame: tuple[Code, ...]
    phrases: dict[int, tuple[str, ...]]
    short: dict[int, tuple[str, ...]]
    foreign: tuple[tuple[str, tuple[int, ...], int], ...]
    openers: dict[str, tuple[str, ...]]
    confusable: tuple[tuple[int, int], ...]
    nonanswers: tuple[str, ...]
    dontknows: tuple[str, ...]
    hedges: tuple[str, ...]
    code_counts: tuple[float, float, float]
    fillers: tuple[str, ...]
    leaning: dict[int, str]
    numbers: tuple[int, ...] = field(init=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "numbers", tuple(c.number for c in self.frame if c.kind == "code"))

    def special(self, kind: str) -> int:
        """The number of the code carrying the given special role."""
        return next(c.number for c in self.frame if c.special == kind)

    def net_of(self, number: int) -> int | None:
        """The net directly above a code (None when it stands alone)."""
        return next(c.net for c in self.frame if c.number == number)


# ---------------------------------------------------------------------------------------------------------
# Code frames
# ---------------------------------------------------------------------------------------------------------

FRAME_WHY = (
    Code(90, "Concerns about the proposal", kind="net", description="Any reason for doubting or opposing the plan."),
    Code(91, "Safety and order", kind="net", net=90,
         description="Worries about what happens in an unstaffed building."),
    Code(1, "Not safe without staff", "s", 91,
         "Personal safety in the building once staff leave.",
         "feeling unsafe; nobody to call for help; lone users at night; vulnerable people unsupervised",
         "trouble caused by other users (code 3)"),
    Code(2, "Staff jobs and hours", "j", 90,
         "The plan seen as a way to cut library jobs or staff hours.",
         "job losses; cost cutting at the expense of staff; pay staff for the extra hours instead",
         "missing the help staff give (code 6)"),
    Code(3, "Antisocial behaviour and damage", "a", 91,
         "Misuse of the building: vandalism, loitering, drinking, mess.",
         "groups hanging around; graffiti; damage to stock or computers",
         "own feeling of being unsafe (code 1)"),
    Code(4, "Cost and waste of money", "c", 90,
         "Running or set-up costs judged too high or poorly spent.",
         "heating and lighting an empty building; card readers and cameras; council tax",
         "staff jobs (code 2)"),
    Code(5, "Technology hard to use", "t", 90,
         "Worry that entry systems, apps or machines will not work or shut people out.",
         "no smartphone; card readers breaking; self-checkout trouble; older users struggling",
         ""),
    Code(6, "Losing help from librarians", "h", 90,
         "Value of having a person to ask: advice, help with forms, company.",
         "help finding books; help with computers; a friendly face",
         "jobs being cut (code 2)"),
    Code(92, "Benefits of the proposal", kind="net", description="Any reason for welcoming the plan."),
    Code(93, "Access for working people", kind="net", net=92,
         description="Being able to get there outside the working day."),
    Code(7, "Convenient after work", "w", 93,
         "Can visit after a usual working day or commute.",
         "closed by the time I get home; pop in on the way back",
         "shift or night work (code 9)"),
    Code(8, "Study space in the evening", "q", 92,
         "A quiet place to study, revise or work in the evening.",
         "students; exams; noisy home; desks and wifi",
         "children's homework as a family benefit (code 10)"),
    Code(9, "Fair access for shift workers", "f", 93,
         "Fairness for people whose hours rule out daytime visits.",
         "shift work; nurses and carers; library should be for everyone",
         "ordinary office hours (code 7)"),
    Code(10, "Good for children and families", "k", 92,
         "Families can go together; somewhere for young people in the evening.",
         "homework; something for teenagers to do; parents only free in the evening",
         ""),
    Code(11, "Better use of the building", "b", 92,
         "Makes use of an empty building; keeps libraries modern and open.",
         "modernising; other services open late; keeps branches from closing",
         ""),
    Code(12, "Only with security in place", "g", 91,
         "Support or acceptance that depends on cameras, guards or entry checks.",
         "as long as there are cameras; depends who can get in; trial it first with security",
         ""),
    Code(13, "Does not affect me", "n", None,
         "Respondent does not use the library or would not use the extra hours.",
         "never go; makes no difference to me", ""),
    Code(97, "Other reason", "o", None, "A reason not covered by another code.", "", "", "other"),
    Code(98, "Don't know", "d", None, "Respondent says they do not know or are unsure.", "", "", "dontknow"),
    Code(99, "No answer", "x", None, "Blank, dash, refusal or a reply that says nothing.", "", "", "nonanswer"),
)

FRAME_IMPROVE = (
    Code(90, "Opening and staffing", kind="net", description="When the library is open and who is there."),
    Code(1, "Later opening hours", "l", 90,
         "Open later on weekday evenings.", "open till 8, 9 or 10; evening opening", "weekends (code 2)"),
    Code(2, "Weekend opening", "e", 90,
         "Open on Sundays or for longer on Saturdays.", "Sunday opening; Saturday afternoons", ""),
    Code(3, "More staff", "s", 90,
         "More staff, or keeping staff on site.", "more librarians; staffed desk; someone to ask", ""),
    Code(91, "Building and facilities", kind="net", description="The space itself and what is in it."),
    Code(4, "More study space", "q", 91,
         "More desks, quiet rooms or study areas.", "quiet zone; bookable rooms; group study", ""),
    Code(5, "Better wifi and computers", "w", 91,
         "Faster wifi, newer computers, printing, charging points.", "sockets; printers; public PCs", ""),
    Code(92, "Comfort and amenities", kind="net", net=91, description="Comfort, refreshments and toilets."),
    Code(6, "Cafe or drinks", "c", 92,
         "Somewhere to get a hot drink or snack.", "coffee machine; cafe corner", ""),
    Code(7, "Toilets and cleanliness", "t", 92,
         "Toilets available and the building kept clean.", "baby changing; clean toilets", ""),
    Code(8, "Comfort: seating, heating, light", "m", 92,
         "Comfortable chairs, warmth, better lighting inside.", "sofas; too cold; dim lighting",
         "outside lighting for safety (code 13)"),
    Code(93, "Stock and activities", kind="net", description="What you can borrow and what goes on there."),
    Code(9, "More and newer books", "b", 93,
         "A wider or newer range of books and other stock.", "new releases; ebooks; large print; other languages", ""),
    Code(10, "Activities for children and teens", "k", 93,
         "Events and clubs for children and young people.", "story time; homework club; holiday activities",
         "adult events (code 11)"),
    Code(11, "Events and classes for adults", "v", 93,
         "Talks, clubs and classes for adults.", "book club; computer classes; author talks",
         "children's events (code 10)"),
    Code(12, "Parking and getting there", "p", None,
         "Parking, buses, bike racks, step-free access.", "car park; bus route; ramp", ""),
    Code(13, "Safety and security", "g", None,
         "Cameras, security staff, lighting outside, safe entry.", "CCTV; guard; lit path",
         "staff numbers in general (code 3)"),
    Code(14, "Nothing, fine as it is", "z", None,
         "Respondent is happy and would change nothing.", "nothing really, it's great; keep it as it is", ""),
    Code(97, "Other change", "o", None, "A change not covered by another code.", "", "", "other"),
    Code(98, "Don't know", "d", None, "Respondent says they do not know or are unsure.", "", "", "dontknow"),
    Code(99, "No answer", "x", None, "Blank, dash, refusal or a reply that says nothing.", "", "", "nonanswer"),
)

# ---------------------------------------------------------------------------------------------------------
# Phrase banks: {slot} names are filled from SLOTS
# ---------------------------------------------------------------------------------------------------------

SLOTS = {
    "lib": ("the library", "the library", "the library", "our library", "the branch", "the local library",
            "my local branch", "the library building"),
    "staff": ("staff", "staff", "library staff", "a librarian", "anyone on duty", "any staff", "a member of staff",
              "proper staff"),
    "nostaff": ("no staff", "no staff", "nobody on duty", "no librarian", "no-one working", "no staff at all",
                "not a single member of staff"),
    "evening": ("in the evening", "at night", "after 6", "after six", "late at night", "after dark",
                "in the evenings", "at 9pm", "at ten at night"),
    "later": ("later opening", "opening until 10", "late opening hours", "longer opening hours", "the extra hours",
              "staying open till 22:00", "opening till 10pm", "the later opening hours"),
    "selfserv": ("self service", "self-service", "the self service", "self service access", "swipe card entry",
                 "the card entry system", "unstaffed access", "self serve"),
    "very": ("really", "very", "so", "genuinely", "extremely", "quite", "pretty", "totally"),
    "kids": ("my kids", "the children", "my two", "our kids", "the grandchildren", "my son", "my daughter",
             "the kids"),
    "town": ("Wrenfield", "this town", "town", "Wrenfield"),
    "nbhd": NEIGHBOURHOODS,
}

PHRASES_WHY = {
    1: (
        "I wouldn't feel safe in {lib} {evening} with {nostaff} around",
        "not safe without staff",
        "who is going to help if something happens {evening}? there'd be nobody there",
        "it feels {very} unsafe to have an empty building open {evening} with no one in charge",
        "as a woman on my own I would not go in {evening} if there is {nostaff}",
        "someone could get hurt and there would be {nostaff} to call for help",
        "I worry about personal safety once the staff go home",
        "an unstaffed building at night is asking for trouble, I wouldn't feel safe",
        "my daughter studies there and I don't like the idea of her being in there alone {evening}",
        "no supervision means it isn't safe for vulnerable people",
        "it's not safe, simple as that",
        "I would be nervous being in {lib} {evening} without {staff}",
        "safety has to come first and without {staff} it won't be safe",
        "what if someone collapses? no first aider, nobody on site",
        "I don't think it would be safe for young people or older people {evening}",
    ),
    2: (
        "this is just a way to cut library jobs",
        "it's a cost cutting exercise and the librarians will lose hours",
        "replacing people with machines, the staff deserve better",
        "it's the first step to getting rid of library staff altogether",
        "I'd rather they paid the staff to work the extra hours than use {selfserv}",
        "fewer staff hours in the end, that's what this is really about",
        "the staff will be next on the list for redundancy",
        "pay people properly to open late instead of replacing them",
        "good jobs in {town} are hard enough to find without cutting more",
        "it's about saving on wages, nothing to do with helping residents",
    ),
    3: (
        "it will attract teenagers hanging around and causing trouble {evening}",
        "there'll be vandalism and nobody to stop it",
        "people will use it to drink or sleep in with no-one to move them on",
        "books and computers will get damaged with nobody watching",
        "the {nbhd} branch already has problems with kids messing about outside",
        "antisocial behaviour, graffiti, mess everywhere",
        "it could turn into a hangout for the wrong crowd",
        "you'll get people going in just to cause a nuisance",
        "the toilets will be wrecked within a month",
        "drug dealing in the car park is bad enough already without opening up the building",
    ),
    4: (
        "waste of money heating and lighting an empty building",
        "who pays for the electricity and the new door system? the taxpayer",
        "the council should spend the money on fixing the roads",
        "the cost of cameras and card readers would be better spent on books",
        "too expensive for how few people will actually use it",
        "more council tax being wasted",
        "it will cost a fortune to set up and then nobody will come",
        "there are better things to spend money on in {town}",
        "the running costs don't add up",
    ),
    5: (
        "I'm not good with technology and {selfserv} will be confusing",
        "older people won't manage the card readers",
        "what happens when the machine breaks and you're locked out",
        "I don't have a smartphone so I couldn't use an app to get in",
        "the self checkout machines never work properly as it is",
        "not everyone can use computers, it shuts people out",
        "my mum would never work out the entry system",
        "I don't trust these card systems, they always go wrong",
    ),
    6: (
        "you need a person to ask for help finding things",
        "the librarians help me with forms and the computer, a machine can't do that",
        "half the point of {lib} is the people who work there",
        "there'd be no-one to ask for advice about books for the grandchildren",
        "you lose the friendly face and the chat, which matters to lonely people",
        "the staff know everyone and they know what you like to read",
        "I go in for the help as much as the books",
        "a real person makes all the difference",
    ),
    7: (
        "I work 9 to 5 so I can never get to {lib} when it's open",
        "it would let me go after work",
        "by the time I finish work it's closed, so {later} would be great",
        "more convenient, I could pop in on the way home",
        "finally I could return books without rushing in my lunch break",
        "I commute and get back after 7, this means I could actually use it",
        "I'd use it loads more if it was open after work",
        "opening hours at the moment are no good for anyone with a job",
        "it's always shut when I'm free",
        "the current opening hours suit retired people but not workers",
    ),
    8: (
        "somewhere quiet to study {evening}, my house is too noisy",
        "as a student I need study space after 6",
        "the college library shuts early and I need somewhere to revise",
        "good for students to have a desk and wifi in the evenings",
        "my son has exams coming up and needs a quiet place to work",
        "study space is hard to find in {town}, this would help a lot",
        "I share a flat and there's nowhere to concentrate, so a quiet study space would be amazing",
        "I'd go there to revise every night during exams",
        "more study space {evening} is exactly what students need",
    ),
    9: (
        "I work shifts and the current hours don't suit people like me",
        "it's fairer for people who work nights and odd hours",
        "nurses and carers can't get there in the daytime",
        "the library should be for everyone, not just people free in the day",
        "more access for working people on shifts",
        "shift workers pay council tax too and never get to use it",
        "I do lates and earlies, so I never know when I'll be free",
        "fair access for people who work unsocial hours",
    ),
    10: (
        "it's great for families, we could go together after tea",
        "{kids} could do homework there in the evening",
        "something for young people to do instead of hanging about the streets",
        "the children's section is always packed on Saturdays, spreading it out would help",
        "as a parent the evenings are the only time we're free",
        "a safe warm place for teenagers to go {evening}",
        "{kids} love it there and we never get the chance on weekdays",
        "good for families with working parents",
    ),
    11: (
        "it makes better use of a building that sits empty most evenings",
        "it's about time the library modernised",
        "other services are open late so why not the library",
        "good use of resources, the building is there anyway",
        "it keeps libraries relevant so they don't close",
        "it's how things are done now, everything is self-service",
        "libraries need to move with the times or they'll shut",
        "the building is empty half the week, might as well use it",
    ),
    12: (
        "as long as there are cameras and proper security",
        "only if there's a security guard on site",
        "it depends how they control who gets in",
        "fine if the entry system is secure and checked",
        "I'd support it if they trial it first with security in place",
        "ok but only with CCTV and an alarm button",
        "depends on the security measures, it could work if done right",
        "yes in principle but they need someone keeping an eye on it",
    ),
    13: (
        "I never use the library so it makes no difference to me",
        "doesn't affect me, I don't go",
        "I wouldn't go in the evening anyway",
        "I buy my books online so not bothered",
        "I haven't been in years",
        "not something I'd use myself",
    ),
    97: (
        "they should fix the leaking roof first",
        "bring back the mobile library",
        "the bus doesn't run that late anyway",
        "I read on my tablet these days",
        "what about the other branches",
        "they never listen to surveys like this",
        "it should be decided by the people who actually use it",
        "the consultation letter was confusing",
    ),
}

SHORT_WHY = {
    1: ("safety", "not safe", "unsafe", "safety concerns", "Safety!"),
    2: ("jobs", "staff cuts", "save the staff", "job losses"),
    3: ("vandalism", "antisocial behaviour", "trouble makers"),
    4: ("cost", "waste of money", "money"),
    5: ("technology", "too complicated", "machines"),
    6: ("need staff to help", "no help", "need people"),
    7: ("convenient", "after work", "handy", "opening hours"),
    8: ("study space", "studying", "somewhere to revise"),
    9: ("shift work", "fairer", "access for all"),
    10: ("kids", "good for families", "homework"),
    11: ("modernise", "good use of building", "about time"),
    12: ("needs cameras", "security", "depends on security"),
    13: ("dont use it", "not bothered"),
    97: ("parking",),
}

PHRASES_IMPROVE = {
    1: (
        "open later in the evenings",
        "{later}",
        "longer opening hours please",
        "stay open till at least 8 on weekdays",
        "later opening so working people can go",
        "being open after work",
        "opening hours that suit people with jobs",
        "open until 9 or 10 at night",
    ),
    2: (
        "open on Sundays",
        "Sunday opening",
        "longer hours on Saturday",
        "weekend opening, it shuts at 1 on Saturday",
        "open all weekend",
        "being open on Sunday afternoons for families",
    ),
    3: (
        "more staff",
        "keep the staff, they are the best thing about it",
        "more librarians so you're not queueing to ask a question",
        "a staffed help desk all day",
        "someone there to help at all times",
        "pay for more staff hours instead of {selfserv}",
        "more staff on the desk, they are run off their feet",
    ),
    4: (
        "more study space",
        "more desks and a proper quiet area",
        "a silent study room",
        "bookable rooms for group study",
        "more places to sit and work with a laptop",
        "a quiet zone away from the children's section",
        "study space that isn't next to the door",
    ),
    5: (
        "better wifi",
        "faster wifi and more plug sockets",
        "newer computers, the ones there are ancient",
        "a printer that actually works",
        "more charging points",
        "wifi that doesn't drop out every ten minutes",
        "more public computers",
    ),
    6: (
        "a cafe",
        "a coffee machine",
        "somewhere to get a cup of tea",
        "a small cafe corner would be lovely",
        "being allowed to have a hot drink",
        "a vending machine for drinks and snacks",
    ),
    7: (
        "clean toilets",
        "public toilets that are open",
        "baby changing facilities",
        "the toilets need a refurb",
        "keep it cleaner, the carpets are filthy",
    ),
    8: (
        "comfier chairs",
        "it's always freezing, sort the heating out",
        "better lighting inside, it's so dim",
        "a few sofas to read on",
        "proper chairs, the plastic ones kill your back",
        "make it warmer and more welcoming",
    ),
    9: (
        "more books",
        "newer books, the shelves are full of old stuff",
        "more new releases",
        "more large print books",
        "more ebooks and audiobooks on the app",
        "a bigger crime and thriller section",
        "books in other languages",
        "more up to date non-fiction",
        "shorter waiting lists for popular books",
    ),
    10: (
        "more for kids to do",
        "story time on Saturdays as well",
        "a homework club after school",
        "activities for teenagers",
        "holiday clubs for children",
        "more events for under fives",
        "a proper teen corner",
    ),
    11: (
        "a book club",
        "more events and talks",
        "computer classes for older people",
        "author visits",
        "evening classes",
        "a knitting group or something social",
        "more things going on for adults",
    ),
    12: (
        "more parking",
        "a car park",
        "a better bus service to get there",
        "somewhere to lock a bike",
        "step-free access at the front door",
        "parking is impossible near the {nbhd} branch",
    ),
    13: (
        "CCTV",
        "better lighting outside, the path is pitch black",
        "security staff {evening}",
        "a security guard if they're open late",
        "cameras and a panic button",
        "make it feel safer at night",
    ),
    14: (
        "nothing really, it's great as it is",
        "I'm happy with it as it is",
        "nothing, the staff are lovely",
        "can't think of anything, it's fine",
        "leave it alone, it works",
    ),
    97: (
        "fix the roof",
        "bring back the mobile library",
        "lower fines",
        "a garden to read in",
        "let dogs in",
        "better signs so you can find things",
    ),
}

SHORT_IMPROVE = {
    1: ("opening hours", "later hours", "hours"),
    2: ("sundays", "weekends"),
    3: ("staff", "more staff"),
    4: ("study space", "desks"),
    5: ("wifi", "computers"),
    6: ("cafe", "coffee"),
    7: ("toilets",),
    8: ("heating", "chairs"),
    9: ("books", "more books"),
    10: ("kids stuff",),
    11: ("events",),
    12: ("parking",),
    13: ("security",),
    14: ("nothing needed", "all good"),
    97: ("dogs",),
}

# (sentence, true codes, stance: -1 oppose, 0 any, +1 support); written for this demo
FOREIGN_WHY = (
    ("No me sentiría segura en la biblioteca por la noche sin nadie del personal.", (1,), -1),
    ("Necesito un lugar tranquilo para estudiar por las tardes, en casa hay mucho ruido.", (8,), 1),
    ("Trabajo hasta tarde y nunca llego antes de que cierre, así que me parece muy bien.", (7,), 1),
    ("Es una excusa para quitar puestos de trabajo a los bibliotecarios.", (2,), -1),
    ("Ohne Personal ist es abends nicht sicher, und es wird bestimmt Ärger geben.", (1, 3), -1),
    ("Ich arbeite bis sechs und komme sonst nie in die Bücherei.", (7,), 1),
    ("Ich komme mit diesen Automaten nicht zurecht.", (5,), -1),
    ("Gut für Familien, die Kinder können abends dort Hausaufgaben machen.", (10,), 1),
    ("Potrzebuję cichego miejsca do nauki wieczorem.", (8,), 1),
    ("Pracuję na zmiany, więc dłuższe godziny bardzo mi pomogą.", (9,), 1),
    ("Bez pracowników wieczorem nie będzie bezpiecznie.", (1,), -1),
    ("To strata pieniędzy.", (4,), -1),
)
FOREIGN_IMPROVE = (
    ("Más libros en español, por favor.", (9,), 0),
    ("Una cafetería pequeña estaría genial.", (6,), 0),
    ("Que abra más tarde y también los domingos.", (1, 2), 0),
    ("Besseres WLAN und mehr Steckdosen.", (5,), 0),
    ("Mehr ruhige Arbeitsplätze zum Lernen.", (4,), 0),
    ("Mehr Parkplätze vor dem Gebäude.", (12,), 0),
    ("Więcej książek po polsku.", (9,), 0),
    ("Więcej zajęć dla dzieci.", (10,), 0),
    ("Więcej pracowników, którzy mogą pomóc.", (3,), 0),
)

OPENERS_WHY = {
    "oppose": ("", "", "", "", "", "Bad idea.", "I'm against it because", "Honestly,", "No way.",
               "I don't like it,", "Sorry but", "Terrible plan.", "NO."),
    "support": ("", "", "", "", "", "Good idea!", "I'm all for it because", "Yes!", "About time.",
                "Brilliant idea,", "Makes sense,", "Great plan."),
    "neutral": ("", "", "", "Not sure.", "Mixed feelings.", "Could go either way,", "Hmm,", "In two minds,"),
}
OPENERS_IMPROVE = {"any": ("", "", "", "", "", "Easy -", "Honestly", "I'd say", "If I could change one thing:",
                           "Probably", "Definitely")}

NONANSWERS_WHY = ("", "", "", "n/a", "N/A", "no comment", "-", "nothing", ".", "none", "no", "?", "just because",
                  "prefer not to say", "NA")
NONANSWERS_IMPROVE = ("", "", "", "n/a", "N/A", "no comment", "-", ".", "?", "NA", "pass", "prefer not to say")
DONTKNOWS = ("dont know", "don't know", "not sure", "dunno", "no idea", "DK", "can't say", "Don't know really")

HEDGES_WHY = ("I think", "probably", "to be honest", "tbh", "imo", "in my opinion", "I suppose", "mainly", "basically")
HEDGES_IMPROVE = ("maybe", "ideally", "probably", "I guess", "just")
CONNECTORS = (". ", ". ", ", and ", " and ", "; ", " - ", ". Also ", ", plus ", ". And ", "... ", ", also ")
FILLERS_WHY = (
    "I have lived in {nbhd} for {years} years and used the library since I was little.",
    "My late husband used to take me every Tuesday without fail.",
    "Don't get me wrong, I can see why the council wants to try something.",
    "To be honest I hadn't thought about it much until this survey came through the door.",
    "We had something similar at my work and it ended up a disaster.",
    "Anyway that's my opinion for what it's worth.",
    "I filled in the last survey too and nothing happened.",
    "The {nbhd} branch is the one I use most, it's walking distance.",
    "I know money is tight for everyone at the moment.",
    "My neighbour feels the same and so does most of my street.",
    "I'm not against change as such, it just has to be thought through.",
    "Things have changed a lot since they did the refurbishment.",
)
VARIANTS = (
    ("don't", "do not"), ("it's", "it is"), ("wouldn't", "would not"), ("can't", "cannot"), ("I'd", "I would"),
    ("there'd", "there would"), ("I'm", "I am"), (" and ", " & "), ("because", "cos"), ("isn't", "is not"),
    ("people", "folk"), ("a lot", "loads"), ("please", "pls"), ("nobody", "no one"), ("the library", "the lib"),
    ("won't", "will not"), ("really", "honestly"),
)
FILLERS_IMPROVE = (
    "I go to the {nbhd} branch about once a week.",
    "It's a lovely building but it feels a bit tired now.",
    "The staff do their best with what they've got.",
    "I used to take {kids} every Saturday morning.",
    "Other towns nearby seem to have much better libraries.",
    "That's probably more than one thing, sorry!",
    "I've been a member for {years} years so I've seen it go downhill a bit.",
    "Honestly it's one of the few free places left to go.",
)
LEANING_WHY = {c: "oppose" for c in (1, 2, 3, 4, 5, 6)} | {c: "support" for c in (7, 8, 9, 10, 11)}
VARIANTS_BOTH_WAYS = VARIANTS + tuple((b, a) for a, b in VARIANTS)
EMOJI = ("👍", "😡", "📚", "🙂", "😬", "🤷", "👎", "❤️", "😂", "🙏")
SHOUT_TAILS = ("!!!", "!!", "...", "??", "!!!!", "?!")
MISSPELL = {
    "library": "libary", "definitely": "definately", "because": "becuase", "really": "realy",
    "people": "poeple", "their": "thier", "evening": "evenning", "opening": "openning",
    "until": "untill", "staff": "staf", "which": "wich", "safe": "saf", "quiet": "quite", "nobody": "noone",
    "librarians": "librarans", "computers": "computors", "separate": "seperate", "there": "their",
}
CONTACTS = (
    "call me on 07700 900{n3}", "my number is 07700 900{n3} if you want to discuss",
    "email me at reader.wren{n2}@example.org", "contact: quill.reader{n2}@example.net",
    "ring 07700 900{n3} any time", "happy to talk more, tansy.mum{n2}@example.com",
)

SPEC_WHY = QuestionSpec("why", FRAME_WHY, PHRASES_WHY, SHORT_WHY, FOREIGN_WHY, OPENERS_WHY,
                        ((1, 3), (7, 9), (2, 6)), NONANSWERS_WHY, DONTKNOWS, HEDGES_WHY, (0.55, 0.33, 0.12),
                        FILLERS_WHY, LEANING_WHY)
SPEC_IMPROVE = QuestionSpec("improve", FRAME_IMPROVE, PHRASES_IMPROVE, SHORT_IMPROVE, FOREIGN_IMPROVE,
                            OPENERS_IMPROVE, ((4, 8), (10, 11), (1, 2)), NONANSWERS_IMPROVE, DONTKNOWS,
                            HEDGES_IMPROVE, (0.72, 0.23, 0.05), FILLERS_IMPROVE, {})

# ---------------------------------------------------------------------------------------------------------
# Respondents and closed-ended items
# ---------------------------------------------------------------------------------------------------------

NBHD_SAMPLE = np.array([0.30, 0.18, 0.16, 0.20, 0.16])
NBHD_POPULATION = np.array([0.26, 0.19, 0.19, 0.19, 0.17])
NBHD_SUPPORT = np.array([0.45, -0.35, -0.55, 0.15, 0.0])
NBHD_WORRY = np.array([0.06, 0.0, 0.16, 0.0, 0.03])
AGE_SAMPLE = np.array([[0.14, 0.15, 0.16, 0.20, 0.21, 0.14],   # sample composition by neighbourhood
                       [0.05, 0.08, 0.14, 0.21, 0.28, 0.24],
                       [0.07, 0.11, 0.15, 0.20, 0.25, 0.22],
                       [0.08, 0.12, 0.17, 0.20, 0.24, 0.19],
                       [0.06, 0.12, 0.18, 0.21, 0.24, 0.19]])
AGE_POPULATION = np.array([0.14, 0.17, 0.17, 0.21, 0.19, 0.12])
CHILDREN_BY_AGE = np.array([0.06, 0.30, 0.62, 0.45, 0.08, 0.02])
CHILDREN_POPULATION = np.array([0.29, 0.71])
SUPPORT_CUTS = np.array([-2.15, -1.15, -0.4, 1.0])


def _categorical(rng: np.random.Generator, probs: np.ndarray) -> np.ndarray:
    """Draw one category index per row of a (n, k) probability matrix."""
    cum = np.cumsum(probs, axis=1)
    u = rng.random(len(probs))[:, None] * cum[:, -1:]
    return (u > cum).sum(axis=1)


def _rake(base: np.ndarray, margins: list[tuple[np.ndarray, np.ndarray]], iterations: int = 25) -> np.ndarray:
    """Iterative proportional fitting of weights to population shares; rows with category -1 are left alone."""
    w = base.copy()
    for _ in range(iterations):
        for cats, target in margins:
            valid = cats >= 0
            totals = np.bincount(cats[valid], weights=w[valid], minlength=len(target))
            factor = target * w[valid].sum() / totals
            w[valid] *= factor[cats[valid]]
    return w


def _trim(w: np.ndarray, low: float = 0.4, high: float = 2.5, rounds: int = 8) -> np.ndarray:
    """Cap extreme weights and rescale to mean 1, repeating so the caps hold after rescaling."""
    for _ in range(rounds):
        w = np.clip(w / w.mean(), low, high)
    return w / w.mean()


def simulate_respondents(rng: np.random.Generator, n: int) -> pd.DataFrame:
    """Closed-ended answers plus the hidden traits that drive the open answers."""
    nbhd = _categorical(rng, np.tile(NBHD_SAMPLE, (n, 1)))
    age = _categorical(rng, AGE_SAMPLE[nbhd])
    kids = rng.random(n) < CHILDREN_BY_AGE[age]
    student = (age == 0) & (rng.random(n) < 0.62)
    shift = (age >= 1) & (age <= 3) & (rng.random(n) < 0.17)
    worry = rng.random(n) < 0.14 + 0.075 * age + NBHD_WORRY[nbhd]

    rate = np.exp(0.55 + 0.7 * student + 0.35 * kids - 0.05 * age + rng.normal(0.0, 0.6, n))
    visits = rng.poisson(rate * rng.gamma(2.0, 0.5, n))
    visits = np.where(rng.random(n) < 0.15, 0, np.minimum(visits, 30))

    latent = (0.35 + 0.8 * student + 0.55 * kids + 0.8 * shift - 0.21 * age - 1.25 * worry
              + NBHD_SUPPORT[nbhd] + 0.12 * np.log1p(visits) + rng.logistic(0.0, 0.85, n))
    support = 1 + np.searchsorted(SUPPORT_CUTS, latent)
    refused = rng.random(n) < 0.018 + 0.006 * age
    support = np.where(refused, 9, support)
    visits_dk = rng.random(n) < 0.02

    age_missing = rng.random(n) < 0.005
    kids_missing = rng.random(n) < 0.01
    base = np.exp(rng.normal(0.0, 0.18, n))
    weight = _rake(base, [(np.where(age_missing, -1, age), AGE_POPULATION),
                          (nbhd, NBHD_POPULATION),
                          (np.where(kids_missing, -1, (~kids).astype(int)), CHILDREN_POPULATION)])
    weight = np.round(_trim(weight), 4)

    numbers = rng.choice(np.arange(1, 100000), size=n, replace=False)
    return pd.DataFrame({
        "resp_id": [f"WR{k:05d}" for k in numbers],
        "support": support.astype(float),
        "age_band": np.where(age_missing, np.nan, age + 1.0),
        "neighbourhood": nbhd + 1.0,
        "visits_month": np.where(visits_dk, 99.0, visits.astype(float)),
        "children": np.where(kids_missing, np.nan, np.where(kids, 1.0, 2.0)),
        "weight": weight,
        "_age": age, "_kids": kids, "_student": student, "_shift": shift, "_worry": worry,
        "_visits": visits,
    })


# ---------------------------------------------------------------------------------------------------------
# True codes
# ---------------------------------------------------------------------------------------------------------

def _stances(people: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Indicator arrays for opposing, supporting and neutral/refused respondents."""
    s = people["support"].to_numpy()
    opp = (s <= 2).astype(float)
    sup = ((s >= 4) & (s <= 5)).astype(float)
    return opp, sup, 1.0 - opp - sup


def _why_weights(people: pd.DataFrame) -> tuple[np.ndarray, tuple[int, ...]]:
    """Relative chance of each substantive 'why' code per respondent."""
    opp, sup, neu = _stances(people)
    age = people["_age"].to_numpy()
    kids, student = people["_kids"].to_numpy(), people["_student"].to_numpy()
    shift, worry = people["_shift"].to_numpy(), people["_worry"].to_numpy()
    salt = (people["neighbourhood"].to_numpy() == 3)
    visits = people["_visits"].to_numpy()
    cols = {
        1: (3.0 * opp + 0.8 * neu + 0.25 * sup) * (1 + 1.5 * worry),
        2: 2.0 * opp + 0.5 * neu + 0.08 * sup,
        3: (1.4 * opp + 0.5 * neu + 0.08 * sup) * (1 + 0.8 * worry) * np.where(salt, 1.8, 1.0),
        4: 1.3 * opp + 0.9 * neu + 0.08 * sup,
        5: (1.2 * opp + 0.6 * neu + 0.08 * sup) * (0.25 + 0.4 * age),
        6: (1.3 * opp + 0.4 * neu + 0.05 * sup) * (0.6 + 0.2 * age),
        7: (2.2 * sup + 0.6 * neu + 0.08 * opp) * np.where((age >= 1) & (age <= 3), 1.5, 0.5),
        8: (1.2 * sup + 0.3 * neu + 0.05 * opp) * np.where(student, 5.0, np.where(age <= 1, 1.0, 0.35)),
        9: (0.6 * sup + 0.2 * neu + 0.03 * opp) * np.where(shift, 5.0, 0.8),
        10: (0.5 * sup + 0.2 * neu + 0.05 * opp) * np.where(kids, 4.0, 0.5),
        11: 1.3 * sup + 0.4 * neu + 0.05 * opp,
        12: 1.8 * neu + 0.7 * sup + 0.4 * opp,
        13: (1.2 * neu + 0.2 * sup + 0.2 * opp) * np.where(visits == 0, 3.0, 0.4),
        97: np.full(len(people), 0.22),
    }
    return np.column_stack(list(cols.values())), tuple(cols)


def _improve_weights(people: pd.DataFrame) -> tuple[np.ndarray, tuple[int, ...]]:
    """Relative chance of each substantive 'improve' code per respondent."""
    opp, sup, neu = _stances(people)
    age = people["_age"].to_numpy()
    kids, student = people["_kids"].to_numpy(), people["_student"].to_numpy()
    worry, visits = people["_worry"].to_numpy(), people["_visits"].to_numpy()
    old = age >= 4
    n = len(people)
    cols = {
        1: (1.6 * sup + 0.8 * neu + 0.3 * opp) * np.where((age >= 1) & (age <= 3), 1.5, 1.0),
        2: np.full(n, 0.8) * np.where(kids, 1.4, 1.0),
        3: 2.0 * opp + 0.8 * neu + 0.3 * sup,
        4: 0.4 * np.where(student, 5.0, np.where(age <= 1, 1.5, 0.5)),
        5: 0.7 * np.where(age <= 2, 2.0, 0.7),
        6: np.full(n, 0.6),
        7: 0.5 * np.where(kids | old, 1.5, 1.0),
        8: 0.6 * np.where(old, 1.6, 1.0),
        9: 1.3 * np.where(age >= 3, 1.3, 1.0),
        10: 0.3 * np.where(kids, 5.0, 1.0),
        11: 0.6 * np.where(old, 1.5, 1.0),
        12: 0.6 * np.where(old, 1.5, 1.0),
        13: (0.9 * opp + 0.5 * neu + 0.3 * sup) * (1 + worry),
        14: 0.45 * np.where(visits >= 4, 1.5, 1.0),
        97: np.full(n, 0.3),
    }
    return np.column_stack(list(cols.values())), tuple(cols)


def _draw_codes(rng: np.random.Generator, weights: np.ndarray, numbers: tuple[int, ...],
                counts: tuple[float, float, float]) -> list[list[int]]:
    """One to three distinct codes per row, most likely first (Gumbel top-k sampling without replacement)."""
    n = len(weights)
    k = 1 + _categorical(rng, np.tile(counts, (n, 1)))
    keys = np.log(weights) + rng.gumbel(size=weights.shape)
    order = np.argsort(-keys, axis=1, kind="stable")
    codes = np.asarray(numbers)[order]
    return [codes[i, : k[i]].tolist() for i in range(n)]


# ---------------------------------------------------------------------------------------------------------
# Verbatims
# ---------------------------------------------------------------------------------------------------------

SLOT_RE = re.compile(r"\{(\w+)\}")
WORD_RE = re.compile(r"[A-Za-z]{4,}")


class Writer:
    """Turns true codes into messy verbatims, drawing every choice from one random generator."""

    def __init__(self, rng: np.random.Generator):
        self.rng = rng

    def pick(self, options):
        """One element of a sequence."""
        return options[int(self.rng.integers(len(options)))]

    def chance(self, p: float) -> bool:
        """True with probability p."""
        return bool(self.rng.random() < p)

    def fill(self, template: str) -> str:
        """Replace {slot} names with a random synonym."""
        def sub(match: re.Match) -> str:
            name = match.group(1)
            if name == "years":
                return str(int(self.rng.integers(3, 45)))
            return self.pick(SLOTS[name])
        return SLOT_RE.sub(sub, template)

    def clause(self, spec: QuestionSpec, code: int) -> str:
        """One phrase for one code, sometimes hedged."""
        text = self.fill(self.pick(spec.phrases[code]))
        if self.chance(0.12):
            text = f"{self.pick(spec.hedges)} {text}"
        return text

    def compose(self, spec: QuestionSpec, codes: list[int], stance: str) -> str:
        """A full answer: optional opener, one clause per code joined naturally, sometimes a long ramble."""
        if len(codes) == 1 and self.chance(0.09):
            return self.pick(spec.short[codes[0]])
        if self.chance(0.012):
            return self.ramble(spec, codes)
        clauses = [self.clause(spec, c) for c in codes]
        text = clauses[0]
        for part in clauses[1:]:
            text += self.pick(CONNECTORS) + part
        leaning = spec.leaning.get(codes[0], stance)
        if leaning != stance:
            stance = "neutral"
        openers = spec.openers.get(stance, spec.openers.get("any", ("",)))
        opener = self.pick(openers)
        if opener:
            lower = opener[-1] not in ".!:-" and not text[1:2].isupper()
            text = f"{opener} {text[0].lower() + text[1:] if lower else text}"
        text = _sentence_case(text)
        if self.chance(0.55):
            text += "."
        return text

    def ramble(self, spec: QuestionSpec, codes: list[int]) -> str:
        """A long answer (roughly 60-160 words): scene-setting sentences around two phrasings per code."""
        count = int(self.rng.integers(3, 7))
        sentences = [self.fill(f) for f in self.rng.permutation(np.array(spec.fillers, dtype=object))[:count]]
        for code in codes:
            picks = self.rng.choice(len(spec.phrases[code]), size=min(2, len(spec.phrases[code])), replace=False)
            body = [self.fill(spec.phrases[code][int(j)]) for j in picks]
            sentences.insert(int(self.rng.integers(1, len(sentences) + 1)), " and ".join(body))
        text = " ".join(s if s[-1] in ".!?" else s + "." for s in sentences)
        return _sentence_case(text)

    def typo(self, text: str) -> str:
        """Misspell a known word or swap, drop or double a letter in one or two words."""
        known = [(w, wrong) for w, wrong in MISSPELL.items() if _has_phrase(text, w)]
        if known and self.chance(0.5):
            word, wrong = self.pick(known)
            return _phrase_re(word).sub(wrong, text, count=1)
        for _ in range(1 + int(self.chance(0.3))):
            spans = [m.span() for m in WORD_RE.finditer(text)]
            if not spans:
                break
            a, b = spans[int(self.rng.integers(len(spans)))]
            word = text[a:b]
            i = int(self.rng.integers(1, len(word) - 1))
            kind = int(self.rng.integers(3))
            if kind == 0:
                word = word[:i] + word[i + 1] + word[i] + word[i + 2:]
            elif kind == 1:
                word = word[:i] + word[i + 1:]
            else:
                word = word[:i] + word[i] + word[i:]
            text = text[:a] + word + text[b:]
        return text

    def vary(self, text: str) -> str:
        """Swap one everyday wording for an equivalent (contractions, '&', 'cos'), so answers repeat less."""
        pairs = [(a, b) for a, b in VARIANTS_BOTH_WAYS if _has_phrase(text, a)]
        if not pairs:
            return text
        old, new = self.pick(pairs)
        return _phrase_re(old).sub(new, text, count=1)

    def mess(self, text: str) -> str:
        """Typos, case, repeated punctuation, emoji and the odd stray newline or contact detail."""
        if self.chance(0.45):
            text = self.vary(text)
        if "library" in text and self.chance(0.08):
            text = text.replace("library", "libary", 1)
        if self.chance(0.2):
            text = self.typo(text)
        r = self.rng.random()
        if r < 0.025:
            text = text.upper()
        elif r < 0.28:
            text = text.lower()
        if self.chance(0.05):
            text = text.rstrip(".") + self.pick(SHOUT_TAILS)
        if self.chance(0.025):
            text = f"{text} {self.pick(EMOJI)}"
        if len(text) > 300 and self.chance(0.3):
            cut = text.find(". ", len(text) // 2)
            if cut > 0:
                text = text[: cut + 1] + "\n" + text[cut + 2:]
        if self.chance(0.006):
            contact = self.pick(CONTACTS).format(n3=f"{int(self.rng.integers(0, 1000)):03d}",
                                                 n2=int(self.rng.integers(10, 100)))
            text = f"{text.rstrip()} {contact}"
        return text



def _phrase_re(phrase: str) -> re.Pattern:
    """A pattern for a phrase standing on its own (not inside a longer word)."""
    return re.compile(rf"(?<![\w']){re.escape(phrase)}(?![\w'])")


def _has_phrase(text: str, phrase: str) -> bool:
    """Whether the phrase occurs as whole words."""
    return _phrase_re(phrase).search(text) is not None


def _sentence_case(text: str) -> str:
    """Capitalise the first letter and the first letter after each full stop, question or exclamation mark."""
    text = text[:1].upper() + text[1:]
    return re.sub(r"([.!?] )([a-z])", lambda m: m.group(1) + m.group(2).upper(), text)


def _stance_names(people: pd.DataFrame) -> np.ndarray:
    """'oppose', 'support' or 'neutral' for each respondent."""
    s = people["support"].to_numpy()
    return np.where(s <= 2, "oppose", np.where((s >= 4) & (s <= 5), "support", "neutral"))


def write_verbatims(rng: np.random.Generator, people: pd.DataFrame, spec: QuestionSpec,
                    codes: list[list[int]]) -> tuple[list[str], list[list[int]]]:
    """Verbatims for one question and the final true codes (non-answers and other languages change them)."""
    writer = Writer(rng)
    stances = _stance_names(people)
    refused = people["support"].to_numpy() == 9
    nonanswer, dontknow = spec.special("nonanswer"), spec.special("dontknow")
    texts: list[str] = []
    truth: list[list[int]] = []
    for i, true in enumerate(codes):
        r = rng.random()
        p_non = 0.35 if refused[i] else 0.05
        if r < p_non:
            texts.append(writer.pick(spec.nonanswers))
            truth.append([nonanswer])
        elif r < p_non + 0.018:
            texts.append(writer.pick(DONTKNOWS))
            truth.append([dontknow])
        elif r < p_non + 0.028:
            sign = {"oppose": -1, "support": 1}.get(str(stances[i]), 0)
            pool = [f for f in spec.foreign if f[2] in (0, sign)] if sign else list(spec.foreign)
            sentence, fcodes, _ = writer.pick(pool)
            texts.append(sentence)
            truth.append(sorted(fcodes))
        else:
            texts.append(writer.mess(writer.compose(spec, true, str(stances[i]))))
            truth.append(list(true))
    _plant_duplicates(rng, people, texts, truth, pairs=6)
    return texts, truth


def _plant_duplicates(rng: np.random.Generator, people: pd.DataFrame, texts: list[str],
                      truth: list[list[int]], pairs: int) -> None:
    """Copy a few longer answers word for word onto other respondents with the same support score."""
    support = people["support"].to_numpy()
    long_ones = np.flatnonzero([len(t.split()) >= 6 for t in texts])
    sources = rng.choice(long_ones, size=pairs, replace=False)
    for src in sources:
        same = np.flatnonzero(support == support[src])
        dst = int(rng.choice(same[same != src]))
        texts[dst] = texts[src]
        truth[dst] = list(truth[src])


# ---------------------------------------------------------------------------------------------------------
# Double coding
# ---------------------------------------------------------------------------------------------------------

def _code_as_ash(rng: np.random.Generator, spec: QuestionSpec, true: list[int], text: str) -> list[int]:
    """Ash keeps the main code but often misses secondary ones, and sends unreadable foreign answers to Other."""
    if len(true) == 1 and true[0] in (spec.special("nonanswer"), spec.special("dontknow")):
        return list(true)
    if any(f[0] == text for f in spec.foreign) and rng.random() < 0.5:
        return [spec.special("other")]
    out = [true[0]] + [c for c in true[1:] if rng.random() > 0.35]
    if rng.random() < 0.05:
        net = spec.net_of(out[0])
        siblings = [c.number for c in spec.frame if c.kind == "code" and c.net == net and c.number != out[0]
                    and not c.special]
        if siblings:
            out[0] = int(rng.choice(siblings))
    return out


def _code_as_bryn(rng: np.random.Generator, spec: QuestionSpec, true: list[int], text: str) -> list[int]:
    """Bryn catches most secondary codes but mixes up pairs of similar codes and mislabels some don't-knows."""
    nonanswer, dontknow = spec.special("nonanswer"), spec.special("dontknow")
    if true == [dontknow]:
        return [nonanswer] if rng.random() < 0.2 else [dontknow]
    if true == [nonanswer]:
        return list(true)
    swap = {a: b for a, b in spec.confusable} | {b: a for a, b in spec.confusable}
    out = []
    for i, c in enumerate(true):
        if i > 0 and rng.random() < 0.08:
            continue
        out.append(swap[c] if c in swap and rng.random() < 0.15 else c)
    if rng.random() < 0.04:
        out.append(int(rng.choice([c for c in spec.numbers if c < 90])))
    return out


def double_code(rng: np.random.Generator, people: pd.DataFrame, texts: dict[str, list[str]],
                truth: dict[str, list[list[int]]], n: int = DOUBLE_CODED) -> list[tuple[str, str, str, str]]:
    """Rows (respondent_id, question, coder, codes) for a random subset coded blind by both coders."""
    chosen = np.sort(rng.choice(len(people), size=min(n, len(people)), replace=False))
    coders = {"ash": _code_as_ash, "bryn": _code_as_bryn}
    rows = []
    for i in chosen:
        for spec in (SPEC_WHY, SPEC_IMPROVE):
            for coder in CODERS:
                codes = sorted(set(coders[coder](rng, spec, truth[spec.name][i], texts[spec.name][i])))
                rows.append((people["resp_id"].iloc[i], spec.name, coder, ";".join(map(str, codes))))
    return rows


# ---------------------------------------------------------------------------------------------------------
# Writing the files
# ---------------------------------------------------------------------------------------------------------

def _fmt(value: float, decimals: int = 0) -> str:
    """A number as CSV text: empty for system-missing, integer or fixed decimals otherwise."""
    if np.isnan(value):
        return ""
    return f"{value:.{decimals}f}"


def _write_csv(path: Path, header: tuple[str, ...], rows) -> None:
    """UTF-8 CSV with '\\n' line ends and minimal quoting, written atomically."""
    with atomic_open(path, "w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)


def _data_rows(data: pd.DataFrame):
    """Rows of the main data file in column order."""
    for row in data.itertuples(index=False):
        yield (row.resp_id, _fmt(row.support), row.why, row.improve, _fmt(row.age_band),
               _fmt(row.neighbourhood), _fmt(row.visits_month), _fmt(row.children), _fmt(row.weight, 4))


def _label_rows():
    """The data map: a variable-label row (code blank) then one row per value label."""
    for name in COLUMNS:
        yield (name, VARIABLE_LABELS[name], "", "", "")
        for code, text in VALUE_LABELS.get(name, {}).items():
            yield (name, "", str(code), text, "1" if code in MISSING_CODES.get(name, []) else "0")


def _frame_rows(frame: tuple[Code, ...]):
    """Rows of a code frame file."""
    for c in frame:
        yield (str(c.number), c.label, c.kind, "" if c.net is None else str(c.net), c.hotkey, c.description,
               c.include, c.exclude, c.special)


def _write_sav(path: Path, data: pd.DataFrame) -> None:
    """SPSS file with labels and user-missing codes; the header timestamp is fixed so bytes are reproducible."""
    import pyreadstat

    frame = data[list(COLUMNS)].copy()
    with atomic_path(path) as tmp:
        pyreadstat.write_sav(
            frame, str(tmp),
            file_label="Wrenfield library hours survey (invented demo data)",
            column_labels=[VARIABLE_LABELS[c] for c in COLUMNS],
            variable_value_labels={k: {float(c): t for c, t in v.items()} for k, v in VALUE_LABELS.items()},
            missing_ranges={k: [float(c) for c in v] for k, v in MISSING_CODES.items()},
            variable_measure={"support": "ordinal", "age_band": "ordinal", "neighbourhood": "nominal",
                              "children": "nominal", "visits_month": "scale", "weight": "scale",
                              "resp_id": "nominal", "why": "nominal", "improve": "nominal"},
            variable_format={"support": "F1.0", "age_band": "F1.0", "neighbourhood": "F1.0", "children": "F1.0",
                             "visits_month": "F2.0", "weight": "F8.4"},
            row_compress=True,
        )
        raw = bytearray(tmp.read_bytes())
        date, time = SAV_TIMESTAMP
        raw[SAV_DATE_OFFSET:SAV_DATE_OFFSET + len(date) + len(time)] = date + time
        tmp.write_bytes(bytes(raw))


def build_demo(seed: int = DEFAULT_SEED, n_respondents: int = DEFAULT_RESPONDENTS):
    """The demo survey in memory: (data frame, true codes per question, double-coded rows)."""
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise OpenCodeError(f"demo seed: expected a non-negative whole number, got {seed!r}")
    if isinstance(n_respondents, bool) or not isinstance(n_respondents, (int, np.integer)) or n_respondents < 400:
        raise OpenCodeError(f"demo respondents: expected a whole number of at least 400, got {n_respondents!r}")
    rng = np.random.default_rng(seed)
    people = simulate_respondents(rng, int(n_respondents))
    texts: dict[str, list[str]] = {}
    truth: dict[str, list[list[int]]] = {}
    for spec, weigh in ((SPEC_WHY, _why_weights), (SPEC_IMPROVE, _improve_weights)):
        weights, numbers = weigh(people)
        latent = _draw_codes(rng, weights, numbers, spec.code_counts)
        texts[spec.name], truth[spec.name] = write_verbatims(rng, people, spec, latent)
    people["why"], people["improve"] = texts["why"], texts["improve"]
    rows = double_code(rng, people, texts, truth, n=min(DOUBLE_CODED, int(n_respondents) // 4))
    data = people[list(COLUMNS)].reset_index(drop=True)
    return data, truth, rows


def generate_demo(out_dir: str | Path, seed: int = DEFAULT_SEED,
                  n_respondents: int = DEFAULT_RESPONDENTS) -> dict[str, Path]:
    """Write every demo file into out_dir (created if missing); return {file name: path}."""
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise OpenCodeError(f"{out}: is a file, expected a folder for the demo survey")
    data, _, rows = build_demo(seed, n_respondents)
    out.mkdir(parents=True, exist_ok=True)
    paths = {name: out / name for name in FILES}
    _write_csv(paths["wrenfield.csv"], COLUMNS, _data_rows(data))
    _write_csv(paths["wrenfield-labels.csv"], ("variable", "label", "code", "value_label", "missing"), _label_rows())
    _write_sav(paths["wrenfield.sav"], data)
    _write_csv(paths["frame-why.csv"], FRAME_COLUMNS, _frame_rows(FRAME_WHY))
    _write_csv(paths["frame-improve.csv"], FRAME_COLUMNS, _frame_rows(FRAME_IMPROVE))
    _write_csv(paths["double-coded.csv"], ("respondent_id", "question", "coder", "codes"), rows)
    return paths


def main(argv: list[str] | None = None) -> int:
    """Command line: write the demo files into --out (default: this package's folder)."""
    parser = argparse.ArgumentParser(prog="python -m opencode.demo.generate",
                                     description="Write the invented Wrenfield demo survey.")
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent, help="folder to write into")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="random seed (default 2026)")
    parser.add_argument("--respondents", type=int, default=DEFAULT_RESPONDENTS, help="number of respondents")
    args = parser.parse_args(argv)
    try:
        paths = generate_demo(args.out, seed=args.seed, n_respondents=args.respondents)
    except OpenCodeError as err:
        print(f"error: {err}", file=sys.stderr)
        return 1
    for path in paths.values():
        print(path)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
