"""The desk's only themes: a dark and a light one built from the Okabe-Ito colour-blind-safe palette, and one
without colour (the same as the NO_COLOR convention, chosen from the palette). Textual's stock themes are
not offered, so a coder cannot leave the colour-blind-safe set by accident."""

from __future__ import annotations

from textual.theme import Theme

from opencode.files.palette import OKABE_ITO

DARK = Theme(
    name="oecode-dark", dark=True,
    primary=OKABE_ITO["sky_blue"], secondary=OKABE_ITO["blue"], accent=OKABE_ITO["orange"],
    success=OKABE_ITO["bluish_green"], warning=OKABE_ITO["yellow"], error=OKABE_ITO["vermillion"],
    foreground="#E8E6E1", background="#1B1D1F", surface="#232628", panel="#2C3033",
)

LIGHT = Theme(
    name="oecode-light", dark=False,
    primary=OKABE_ITO["blue"], secondary=OKABE_ITO["sky_blue"], accent=OKABE_ITO["vermillion"],
    success=OKABE_ITO["bluish_green"], warning=OKABE_ITO["orange"], error=OKABE_ITO["vermillion"],
    foreground=OKABE_ITO["black"], background="#FAFAF7", surface="#F0F0EB", panel="#E2E2DC",
)

#: No colour at all: greys on black, marks carried by bold, underline, reverse and symbols (as with NO_COLOR).
NO_COLOUR = Theme(
    name="oecode-no-colour", dark=True,
    primary="#FFFFFF", secondary="#BBBBBB", accent="#FFFFFF", success="#FFFFFF", warning="#FFFFFF",
    error="#FFFFFF", foreground="#FFFFFF", background="#000000", surface="#000000", panel="#333333",
)

THEMES = (DARK, LIGHT, NO_COLOUR)
DEFAULT = DARK.name
