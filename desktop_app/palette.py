"""The window's one palette: keep is blue, replace is vermillion, everywhere.

Colours from the Okabe-Ito palette (Okabe and Ito, "Color Universal Design",
2008), which stays distinguishable for the common forms of colour blindness.
Keep and replace are a blue/orange pair (never red/green); every state shown
in colour is also shown in words ("keep", "replace now", "REPLACE IN 2 YEARS")
or with a symbol, so colour is never the only cue.

The register, the results badge, the charts and the Risk tab's two-way map and
histogram all read these names; no other module spells a keep or replace colour.
"""

from __future__ import annotations

# --------------------------------------------------------------------------- decisions
KEEP = "#0072B2"            # Okabe-Ito blue
REPLACE = "#D55E00"         # Okabe-Ito vermillion
NOT_STUDIED = "#6C757D"     # grey: no study yet
TEXT = "#333333"
ON_DECISION = "#FFFFFF"     # text on a KEEP or REPLACE fill (contrast >= 4.5:1)
#: Light tints of KEEP and REPLACE for large areas (the two-way map).
KEEP_TINT = "#9CC7E3"
REPLACE_TINT = "#F0B48F"
#: Attention (out-of-date estimates, notes): dark amber, with a symbol or word beside it.
ATTENTION = "#8A4B00"

# --------------------------------------------------------------------------- series
#: Line colours for alternatives: the defender first (blue, like keep), then the
#: challengers (vermillion first, like replace), then the rest of Okabe-Ito.
SERIES = (KEEP, REPLACE, "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
#: Sites in the capital plan's stacked bars: the rest of Okabe-Ito, never the keep blue or
#: the replace vermillion (a site is neither).
SITES = ("#009E73", "#CC79A7", "#999999", "#F0E442", "#56B4E9", "#E69F00")
#: Inputs at their 10th / 90th percentile (tornado): greys, so that they never read as
#: keep or replace.
LOW = "#BBBBBB"
HIGH = "#4D4D4D"

#: Register words -> colour.  "replace in N years" is a replace state too.
STATE_COLOURS = {"keep": KEEP, "replace now": REPLACE, "not yet studied": NOT_STUDIED}

#: Results badge: key -> (fill, text).
BADGE_COLOURS = {
    "keep": (KEEP, ON_DECISION),
    "replace-now": (REPLACE, ON_DECISION),
    "replace-later": (REPLACE, ON_DECISION),
    "none": ("#9A9A9A", ON_DECISION),
}


def state_colour(words: str) -> str:
    """The colour of a register state, from its words.

    >>> state_colour("keep"), state_colour("replace in 3 years")
    ('#0072B2', '#D55E00')
    """
    if words.startswith("replace"):
        return REPLACE
    return STATE_COLOURS.get(words, TEXT)


def rgb(colour: str) -> tuple[int, int, int]:
    """``"#RRGGBB"`` as a tuple of 0-255 ints.

    >>> rgb(KEEP)
    (0, 114, 178)
    """
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)
