"""Okabe & Ito (2002) "Color Universal Design" palette: colour-blind safe, used by every chart."""

OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}

#: Colours in order of use for categorical series.
SERIES = [OKABE_ITO[k] for k in ("blue", "orange", "bluish_green", "reddish_purple", "sky_blue", "vermillion", "yellow", "black")]

#: The pair for two opposed sides (e.g. oppose / support): orange against bluish green, never red against blue.
SIDE_A = OKABE_ITO["orange"]
SIDE_B = OKABE_ITO["bluish_green"]
