"""No overlapping text in the corner and profile figures, and number formatting by kind.

Overlap is measured with matplotlib's own renderer: the window extent
(bounding box in display pixels) of every visible tick label, axis label,
title and figure text; two boxes that intersect are an overlap.  The
parameter names are long on purpose (the longest kind the report prints).
"""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.report.blocks import KeyValues, format_cell
from speciakin.report.figures.inference import corner_plot, profile_plot

NAMES = [f"log10 k[acylation_of_site_{c}] [L/(mol*s)]" for c in "abcdefgh"] + [
    "shift of pKa[S.N_alkyl]", "pKa[S.N_aryl]"]


def text_boxes(fig):
    """(text, window extent) of every visible piece of text of ``fig``."""
    renderer = fig.canvas.get_renderer()
    items = []
    for ax in fig.axes:
        if not ax.get_visible():
            continue
        items += [ax.xaxis.label, ax.yaxis.label, ax.title]
        for axis in (ax.xaxis, ax.yaxis):
            lo, hi = sorted(axis.get_view_interval())
            items += [t.label1 for t in axis.get_major_ticks()
                      if t.label1.get_visible() and lo - 1e-12 <= t.get_loc() <= hi + 1e-12]
    items += list(fig.texts)
    return [(t.get_text(), t.get_window_extent(renderer)) for t in items if t.get_visible() and t.get_text()]


def overlapping(fig, pad: float = 2.0):
    """Pairs of texts whose boxes, grown by ``pad`` pixels on every side, intersect (touching
    labels such as "-0.526-0.524" count as overlapping)."""
    boxes = [(t, b.expanded((b.width + 2 * pad) / max(b.width, 1e-9), (b.height + 2 * pad) / max(b.height, 1e-9)))
             for t, b in text_boxes(fig)]
    return [(a[0], b[0]) for i, a in enumerate(boxes) for b in boxes[i + 1:] if a[1].overlaps(b[1])]


def test_overlap_check_finds_an_overlap():
    # the check itself can fail: two texts at the same spot overlap
    from speciakin.report.figures._style import new_figure

    fig = new_figure(3, 3)
    fig.text(0.5, 0.5, "one label")
    fig.text(0.5, 0.5, "another label")
    fig.canvas.draw()
    assert overlapping(fig)


@pytest.mark.parametrize("n", [1, 2, 3, 5, 10])
def test_corner_labels_do_not_overlap(n):
    rng = np.random.default_rng(n)
    samples = 2.0 + 1e-3 * rng.standard_normal((400, n))  # close values: long tick labels
    fig = corner_plot(samples, NAMES[:n])
    assert overlapping(fig) == []
    # every parameter is named on the figure (key or axis label)
    shown = " ".join(t for t, _ in text_boxes(fig))
    assert all(name.split("[")[0] in shown.replace("\n", " ") for name in NAMES[:n])


@pytest.mark.parametrize("n", [1, 2, 5, 10])
@pytest.mark.parametrize("centre, half", [(0.0, 1.0), (-0.522, 0.004), (-0.4512, 0.0008)])
def test_profile_labels_do_not_overlap(n, centre, half):
    # narrow ranges around a negative value give the longest tick labels (-0.4520, -0.4512, ...)
    grid = centre + half * np.linspace(-1.0, 1.0, 11)
    values = {name: grid for name in NAMES[:n]}
    delta = {name: 9.0 * ((grid - centre) / half) ** 2 for name in NAMES[:n]}
    fig = profile_plot(values, delta, {name: centre for name in NAMES[:n]},
                       units={name: "log10 L/(mol*s)" for name in NAMES[:n]})
    assert overlapping(fig) == []


def test_integers_print_as_integers_whatever_the_column_format():
    # the seed of the demo process printed as 2.026e+07 with ".4g"
    assert format_cell(20260517, ".4g") == "20260517"
    assert format_cell(3, ".3f") == "3"
    assert format_cell(2.5, ".4g") == "2.5"
    assert dict(KeyValues([("Seed", 20260517)], number_format=".4g").formatted())["Seed"] == "20260517"
