"""Words beside agreement numbers: Landis & Koch (1977) for kappa-like values, Krippendorff (2004) for alpha."""

from __future__ import annotations

import math

# Landis, J.R. & Koch, G.G. (1977) Biometrics 33:159-174, upper bounds of each band.
LANDIS_KOCH_SOURCE = "Landis & Koch 1977"
KRIPPENDORFF_SOURCE = "Krippendorff 2004"
LANDIS_KOCH = ((0.0, "poor"), (0.20, "slight"), (0.40, "fair"), (0.60, "moderate"), (0.80, "substantial"))


def landis_koch_band(value: float | None) -> str:
    """Landis & Koch (1977) band for a kappa-like value: poor, slight, fair, moderate, substantial, almost perfect."""
    if value is None or math.isnan(value):
        return ""
    if value < 0:
        return "poor"
    for upper, word in LANDIS_KOCH[1:]:
        if value <= upper:
            return word
    return "almost perfect"


def krippendorff_band(value: float | None) -> str:
    """Krippendorff (2004) reading of alpha: rely at >= 0.800, tentative conclusions only at >= 0.667."""
    if value is None or math.isnan(value):
        return ""
    if value >= 0.800:
        return "reliable (alpha >= 0.800)"
    if value >= 0.667:
        return "tentative only (0.667 <= alpha < 0.800)"
    return "unreliable (alpha < 0.667)"


def cited(words: str, source: str) -> str:
    """A reading with its source beside it: 'substantial (Landis & Koch 1977)'; empty words stay empty."""
    return f"{words} ({source})" if words else ""


def cited_landis_koch(value: float | None) -> str:
    """The Landis & Koch (1977) band of a kappa-like value, with the citation."""
    return cited(landis_koch_band(value), LANDIS_KOCH_SOURCE)


def cited_krippendorff(value: float | None) -> str:
    """The Krippendorff (2004) reading of an alpha, with the citation."""
    return cited(krippendorff_band(value), KRIPPENDORFF_SOURCE)
