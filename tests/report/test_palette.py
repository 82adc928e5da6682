"""Palette: published Okabe-Ito colours, stable species mapping, distinct styles."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from speciakin.errors import InputError
from speciakin.palette import LINE_STYLES, OKABE_ITO, SPECIES_COLOR_ORDER, SpeciesColors, hex_to_rgb


def test_colours_match_the_published_rgb_values():
    # Okabe, M. and Ito, K., "Color Universal Design", 2008, Fig. 16 (RGB 0-255; from memory).
    published = {
        "black": (0, 0, 0), "orange": (230, 159, 0), "sky blue": (86, 180, 233), "bluish green": (0, 158, 115),
        "yellow": (240, 228, 66), "blue": (0, 114, 178), "vermillion": (213, 94, 0),
        "reddish purple": (204, 121, 167),
    }
    assert {name: hex_to_rgb(color) for name, color in OKABE_ITO.items()} == published
    assert sorted(SPECIES_COLOR_ORDER) == sorted(OKABE_ITO)


def _lab(rgb):
    """sRGB (0-255) -> CIELAB, D65 (IEC 61966-2-1:1999 transfer function and matrix; CIE 15:2004 Lab)."""
    c = np.asarray(rgb, float) / 255.0
    linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    m = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
    xyz = m @ linear / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def test_species_colours_are_clearly_distinct():
    colors = SpeciesColors([f"S{i}" for i in range(8)])
    hexes = [colors.color(f"S{i}") for i in range(8)]
    assert len(set(hexes)) == 8
    labs = [_lab(hex_to_rgb(h)) for h in hexes]
    smallest = min(np.linalg.norm(a - b) for a, b in itertools.combinations(labs, 2))
    # CIE76 delta E above about 10 is an obvious difference at a glance (common practice).
    assert smallest > 10.0


def test_same_species_same_style_regardless_of_lookup_order():
    names = ["zelvamide", "N-acyl product", "O-acyl impurity"]
    first, second = SpeciesColors(names), SpeciesColors(list(names))
    for name in reversed(names):
        second.style(name)
    assert first.mapping() == second.mapping()
    assert first.color("N-acyl product") == first.color("N-acyl product") == OKABE_ITO["vermillion"]


def test_unknown_species_keeps_its_first_style():
    colors = SpeciesColors(["A", "B"])
    late = colors.style("C")
    colors.style("D")
    assert colors.style("C") == late
    assert colors.species == ["A", "B", "C", "D"]


def test_more_species_than_colours_use_line_styles():
    names = [f"S{i}" for i in range(len(SPECIES_COLOR_ORDER) * len(LINE_STYLES))]
    colors = SpeciesColors(names)
    pairs = [(colors.color(n), colors.line_style(n)) for n in names]
    assert len(set(pairs)) == len(pairs)
    assert colors.color("S0") == colors.color("S8") and colors.line_style("S0") != colors.line_style("S8")


def test_duplicate_names_collapse_and_bad_names_raise():
    assert SpeciesColors(["A", "A", "B"]).species == ["A", "B"]
    with pytest.raises(InputError, match="species name"):
        SpeciesColors(["A", ""])
    with pytest.raises(InputError, match="not a hex colour"):
        hex_to_rgb("#12345")
