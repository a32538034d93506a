"""One palette for keep and replace, safe for colour-blind readers, used everywhere.

Colour-vision deficiency is simulated with the Machado, Oliveira and Fernandes (2009)
matrices at full severity (from memory), applied in linear sRGB; colours are compared
as CIELAB distances (CIE 1976 Delta E, D65 white; sRGB and Lab formulas from memory).
A Delta E of about 2 is a just-noticeable difference; 30 is "clearly different at a
glance" (common practice, no source).
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import re  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

from core.estimates import (  # noqa: E402
    Alternative,
    Distribution,
    MarketValues,
    OperatingCosts,
    Study,
    Uncertainty,
)
from core.study import run_study  # noqa: E402
from desktop_app import palette  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
MACHADO = {
    "protanopia": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                   [-0.003882, -0.048116, 1.051998]],
    "deuteranopia": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                     [-0.011820, 0.042940, 0.968881]],
    "tritanopia": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                   [0.004733, 0.691367, 0.303900]],
}


def linear(colour: str) -> np.ndarray:
    c = np.array(palette.rgb(colour)) / 255.0
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def lab(rgb_linear: np.ndarray) -> np.ndarray:
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722],
                    [0.0193, 0.1192, 0.9505]]) @ np.clip(rgb_linear, 0.0, 1.0)
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > (6 / 29) ** 3, np.cbrt(t), t / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def delta_e(a: str, b: str, deficiency: str | None = None) -> float:
    la, lb = linear(a), linear(b)
    if deficiency is not None:
        m = np.array(MACHADO[deficiency])
        la, lb = m @ la, m @ lb
    return float(np.linalg.norm(lab(la) - lab(lb)))


@pytest.mark.parametrize("deficiency", [None, *MACHADO])
@pytest.mark.parametrize("pair", [(palette.KEEP, palette.REPLACE),
                                  (palette.KEEP_TINT, palette.REPLACE_TINT)])
def test_keep_and_replace_differ_for_colour_blind_readers(pair, deficiency):
    assert delta_e(*pair, deficiency) > 30


def test_the_old_red_green_pair_would_fail():
    # The register's former keep green and replace red: nearly one colour to a reader
    # with protanopia (Delta E about 12), which is why they were replaced.
    assert delta_e("#1e7a46", "#b03a2e", "protanopia") < 30


def test_register_and_badge_states_have_words_and_palette_colours():
    from desktop_app.results_panel import BADGE_COLOURS, badge_for

    assert palette.state_colour("keep") == palette.KEEP
    for words in ("replace now", "replace in 3 years"):
        assert palette.state_colour(words) == palette.REPLACE
    assert BADGE_COLOURS["keep"][0] == palette.KEEP
    assert BADGE_COLOURS["replace-now"][0] == BADGE_COLOURS["replace-later"][0] == palette.REPLACE

    class Rec:
        action, defender_years, challenger = "replace", None, "New"

    assert badge_for(Rec()) == ("REPLACE NOW", "replace-now")


def test_no_other_module_spells_a_keep_or_replace_colour():
    spelled = re.compile("|".join(re.escape(c) for c in (palette.KEEP, palette.REPLACE,
                                                       palette.KEEP_TINT, palette.REPLACE_TINT)),
                         re.IGNORECASE)
    for path in (ROOT / "desktop_app").glob("*.py"):
        if path.name != "palette.py":
            assert not spelled.search(path.read_text(encoding="utf-8")), path.name


def test_two_way_map_and_histogram_use_the_palette_with_words(qtbot):
    from desktop_app.risk_view import RiskView

    d = Alternative("PB-2", "defender", 18000.0, 5, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=21000.0, gradient=3500.0))
    c = Alternative("Servo brake", "challenger", 96000.0, 12, MarketValues(decline_rate=0.15),
                    OperatingCosts(first=8200.0, growth=0.04))
    unc = Uncertainty(300, 5, (("Servo brake.first_cost",
                                Distribution("uniform", (60000.0, 140000.0))),))
    result = run_study(Study("Press brake", 0.09, d, (c,), uncertainty=unc))
    view = RiskView()
    qtbot.addWidget(view)
    view.set_result(result)
    image = view.map_image_array()
    won = np.asarray(result.risk.two_way.replace, dtype=bool).T   # the image is (x, y)
    assert won.any() and (~won).any()   # both regions on the map
    assert tuple(image[won][0]) == palette.rgb(palette.REPLACE_TINT)
    assert tuple(image[~won][0]) == palette.rgb(palette.KEEP_TINT)
    assert sorted(t.textItem.toPlainText() for t in view.map_words) == ["KEEP", "REPLACE"]
    legend = view.histogram_plot.plotItem.legend
    names = [label.text for _sample, label in legend.items]
    assert any("favours replacing" in n for n in names)
    view.shutdown()
