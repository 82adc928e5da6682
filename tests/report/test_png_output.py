"""PNG output of the figure helpers: one drawing per figure, the pixels of matplotlib's own savefig.

``to_png`` draws a figure once on its Agg canvas and writes RGB pixels with Pillow instead of
calling ``Figure.savefig`` (which draws a figure with a layout engine twice).  The reference is
matplotlib itself: the same figure built twice, one copy saved by ``savefig`` at the same dpi.
"""

from __future__ import annotations

import io

import numpy as np
import pytest
from PIL import Image

from speciakin.report.figures import inference
from speciakin.report.figures._style import DPI, PNG_COMPRESS_LEVEL, legend_below, new_figure, to_png



def _rng() -> np.random.Generator:
    return np.random.default_rng(5)  # each build draws the same numbers


def _pixels(png: bytes) -> np.ndarray:
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB"))


def _savefig(fig) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI)
    return buffer.getvalue()


def _legend_figure():
    """Two panels, lines, markers, a band, a colour bar and a legend below (constrained layout)."""
    fig = new_figure(6.3, 3.4)
    left, right = fig.subplots(1, 2)
    x = np.linspace(0.0, 60.0, 121)
    left.fill_between(x, np.exp(-x / 30) - 0.1, np.exp(-x / 30) + 0.1, alpha=0.18, linewidth=0)
    left.plot(x, np.exp(-x / 30), label="substrate, a long compound name that wraps")
    left.plot(x[::10], np.exp(-x[::10] / 30), "o", label="data")
    image = right.imshow(_rng().uniform(-1, 1, (6, 6)), cmap="PuOr_r", vmin=-1, vmax=1)
    fig.colorbar(image, ax=right, label="correlation [-]")
    left.set_xlabel("time [min]")
    left.set_ylabel("amount [mol%]")
    right.set_title("\u0394\u03c7\u00b2 and \u00b1 signs")
    legend_below(fig)
    return fig


BUILDERS = {
    "legend below, colour bar": _legend_figure,
    "corner plot": lambda: inference.corner_plot(_rng().normal(size=(300, 5)), [f"p{i} [-]" for i in range(5)],
                                                 draw=False),
    "profile plot": lambda: inference.profile_plot({"a": np.linspace(0, 1, 9), "b": np.linspace(2, 3, 9)},
                                                   {"a": (np.linspace(0, 1, 9) - 0.5) ** 2 * 20,
                                                    "b": (np.linspace(2, 3, 9) - 2.4) ** 2 * 20},
                                                   best={"a": 0.5, "b": 2.4}, draw=False),
}


@pytest.mark.parametrize("build", BUILDERS.values(), ids=list(BUILDERS))
def test_to_png_has_the_pixels_of_savefig(build):
    """Pixel for pixel what matplotlib's savefig writes for the same figure at the same dpi."""
    ours = _pixels(to_png(build()))
    reference = _pixels(_savefig(build()))
    assert ours.shape == reference.shape
    assert np.array_equal(ours, reference)


def test_to_png_writes_rgb_with_resolution_and_software():
    png = to_png(_legend_figure())
    image = Image.open(io.BytesIO(png))
    assert image.mode == "RGB"  # the figure background is opaque: no alpha channel is written
    assert image.size == (round(6.3 * DPI), round(3.4 * DPI))
    assert image.info["dpi"] == pytest.approx((DPI, DPI), abs=0.01)
    assert image.info["Software"] == "speciakin"
    assert 1 <= PNG_COMPRESS_LEVEL <= 9  # a zlib level (RFC 1950)


def test_to_png_draws_the_figure_once():
    fig = _legend_figure()
    draws = []
    original = fig.draw

    def counted(renderer):
        draws.append(renderer)
        return original(renderer)

    fig.draw = counted
    to_png(fig)
    assert len(draws) == 1


def test_corner_plot_makes_axes_only_below_the_diagonal():
    n = 4
    fig = inference.corner_plot(_rng().normal(size=(200, n)), [f"p{i}" for i in range(n)], draw=False)
    cells = sorted((ax.get_subplotspec().rowspan.start, ax.get_subplotspec().colspan.start) for ax in fig.axes)
    assert cells == [(row, col) for row in range(n) for col in range(row + 1)]
