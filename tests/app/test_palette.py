"""The app's colours: readable on its background, the four states apart for colour-blind
readers, and never carried by colour alone.

Readability uses the relative luminance and contrast ratio defined in W3C, "Web Content
Accessibility Guidelines (WCAG) 2.1", section "contrast (minimum)": at least 4.5:1 for
text. Colour-vision deficiencies are simulated with the severity-1.0 matrices of
G. M. Machado, M. M. Oliveira and L. A. F. Fernandes, "A Physiologically-based Model
for Simulation of Color Vision Deficiency", IEEE TVCG 15(6), 2009 (matrix values from
memory), applied to linear RGB; the difference is CIE 1976 Delta E in CIELAB (D65
white, sRGB primaries from IEC 61966-2-1). A Delta E of 20 or more reads as clearly
different colours (common practice, no source).
"""

from __future__ import annotations

import itertools

import pytest

from stepper.app.palette import COLOURS, TONES
from stepper.app.proof_model import STATUS_MARKS

STATES = ("pass", "fail", "incomplete", "unchecked")
MACHADO = {
    "protanopia": ((0.152286, 1.052583, -0.204868), (0.114503, 0.786281, 0.099216), (-0.003882, -0.048116, 1.051998)),
    "deuteranopia": ((0.367322, 0.860646, -0.227968), (0.280085, 0.672501, 0.047413), (-0.011820, 0.042940, 0.968881)),
    "tritanopia": ((1.255528, -0.076749, -0.178779), (-0.078411, 0.930809, 0.147602), (0.004733, 0.691367, 0.303900)),
    "typical": ((1, 0, 0), (0, 1, 0), (0, 0, 1)),
}


def _linear(hex_colour: str) -> tuple[float, ...]:
    def channel(c: int) -> float:  # the sRGB transfer function, IEC 61966-2-1
        v = c / 255
        return v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4

    return tuple(channel(int(hex_colour[i:i + 2], 16)) for i in (1, 3, 5))


def _luminance(rgb: tuple[float, ...]) -> float:
    return 0.2126 * rgb[0] + 0.7152 * rgb[1] + 0.0722 * rgb[2]


def _lab(rgb: tuple[float, ...]) -> tuple[float, float, float]:
    x = (0.4124 * rgb[0] + 0.3576 * rgb[1] + 0.1805 * rgb[2]) / 0.95047
    y = 0.2126 * rgb[0] + 0.7152 * rgb[1] + 0.0722 * rgb[2]
    z = (0.0193 * rgb[0] + 0.1192 * rgb[1] + 0.9505 * rgb[2]) / 1.08883

    def f(t: float) -> float:
        return t ** (1 / 3) if t > 216 / 24389 else (24389 / 27 * t + 16) / 116

    return 116 * f(y) - 16, 500 * (f(x) - f(y)), 200 * (f(y) - f(z))


def _simulate(matrix: tuple[tuple[float, ...], ...], rgb: tuple[float, ...]) -> tuple[float, ...]:
    return tuple(min(1.0, max(0.0, sum(m * c for m, c in zip(row, rgb)))) for row in matrix)


@pytest.mark.parametrize("state", STATES + ("text", "label", "muted", "note"))
def test_every_state_and_text_colour_reads_at_4_5_to_1_on_the_background(state):
    fg, bg = _luminance(_linear(COLOURS[state])), _luminance(_linear(COLOURS["deep"]))
    assert (max(fg, bg) + 0.05) / (min(fg, bg) + 0.05) >= 4.5


@pytest.mark.parametrize("vision", MACHADO)
def test_the_four_states_stay_apart_under_each_colour_vision_deficiency(vision):
    for a, b in itertools.combinations(STATES, 2):
        la = _lab(_simulate(MACHADO[vision], _linear(COLOURS[a])))
        lb = _lab(_simulate(MACHADO[vision], _linear(COLOURS[b])))
        delta = sum((p - q) ** 2 for p, q in zip(la, lb)) ** 0.5
        assert delta >= 20, f"{a} and {b} are only {delta:.1f} apart for {vision}"


def test_on_a_monochrome_terminal_each_state_keeps_its_own_symbol_and_word():
    symbols = [m.symbol for m in STATUS_MARKS.values()]
    words = [m.word for m in STATUS_MARKS.values()]
    assert len(set(symbols)) == len(symbols) and len(set(words)) == len(words)


def test_the_readout_tones_take_their_colours_from_the_stylesheet():
    assert COLOURS["pass"] in TONES["good"] and COLOURS["fail"] in TONES["bad"]
    assert COLOURS["incomplete"] in TONES["wait"] and COLOURS["unchecked"] in TONES["unchecked"]
