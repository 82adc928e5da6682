"""Figure helpers: PNG output at print size, and clear errors for bad arrays."""

from __future__ import annotations

import struct

import numpy as np
import pytest

from speciakin.errors import InputError
from speciakin.report import SpeciesColors, figures
from speciakin.report.document import PNG_SIGNATURE
from speciakin.report.figures._style import DPI, TEXT_WIDTH_IN


def png_info(data: bytes) -> tuple[int, int, float | None]:
    """Width, height [px] and resolution [dots/inch] from the PNG chunks (ISO/IEC 15948, 11.2.2 and 11.3.5.3)."""
    assert data.startswith(PNG_SIGNATURE)
    width, height = struct.unpack(">II", data[16:24])
    dpi = None
    at = data.find(b"pHYs")
    if at > 0:
        ppu_x, _, unit = struct.unpack(">IIB", data[at + 4:at + 13])
        dpi = ppu_x * 0.0254 if unit == 1 else None
    return width, height, dpi


RNG = np.random.default_rng(11)
GRID = np.linspace(0, 60, 61)
PH = np.linspace(6, 10, 41)


def _all_figures() -> dict[str, bytes]:
    colors = SpeciesColors(["S", "P"])
    samples = RNG.normal(size=(200, 3))
    return {
        "time_course": figures.time_course_figure({"S": [0, 10, 20]}, {"S": [1.0, 0.6, 0.3]}, GRID,
                                                  {"S": np.exp(-0.05 * GRID)}, colors),
        "residuals": figures.residuals_figure([0, 10, 0, 10], [1, 0.5, 0, 0.5], [0.1, -0.2, 0.0, 0.3],
                                              ["S", "S", "P", "P"], colors),
        "titrant": figures.titrant_figure(GRID, 0.1 * GRID, GRID, 0.1 * GRID),
        "probability": figures.probability_vs_ph_figure(PH, np.clip(1 - (PH - 8) ** 2, 0, 1), 0.9, (7.7, 8.3)),
        "outcomes": figures.outcomes_vs_ph_figure(PH, {"P": 90 - (PH - 8) ** 2}, {"P": 85 - (PH - 8) ** 2},
                                                  {"P": 95 - (PH - 8) ** 2}, {"P": (85.0, None)}, colors),
        "map": figures.probability_map_figure(PH, [20, 25, 30], np.tile(np.clip(1 - (PH - 8) ** 2, 0, 1), (3, 1)),
                                              level=0.9),
        "profile": figures.profile_figure({"log10 k1": np.linspace(1, 3, 21)},
                                          {"log10 k1": 10 * (np.linspace(1, 3, 21) - 2) ** 2},
                                          {"log10 k1": 2.0}, units={"log10 k1": "L/(mol*s)"}),
        "trace": figures.trace_figure(RNG.normal(size=(100, 8, 2)), ["a", "b"], burn_in=20),
        "corner": figures.corner_figure(samples, ["a", "b", "c"], truths=[0, 0, 0]),
        "correlation": figures.correlation_figure(np.eye(3), ["a", "b", "c"]),
    }


@pytest.fixture(scope="module")
def made():
    """Every figure once, with the count of pyplot figures before and after."""
    import matplotlib.pyplot as plt

    before = len(plt.get_fignums())
    pngs = _all_figures()
    return pngs, before, len(plt.get_fignums())


def test_every_helper_returns_a_print_ready_png(made):
    for name, data in made[0].items():
        width, height, dpi = png_info(data)
        assert dpi is not None and 150 <= dpi <= 200, name
        # no figure wider than the A4 text width (160 mm) at the chosen resolution
        assert width <= TEXT_WIDTH_IN * DPI + 2, name
        assert height > 200, name


def test_helpers_leave_no_pyplot_figures_open(made):
    _, before, after = made
    assert after == before


def test_censored_points_change_the_picture():
    t, y = [0, 10, 20], [1.0, 0.2, 0.01]
    plain = figures.time_course_figure({"S": t}, {"S": y})
    censored = figures.time_course_figure({"S": t}, {"S": y}, censored={"S": [False, False, True]}, loq={"S": 0.05})
    assert plain != censored


@pytest.mark.parametrize("call, match", [
    (lambda: figures.time_course_figure({"S": [0, 1]}, {"S": [1.0]}), "differ in length"),
    (lambda: figures.time_course_figure({"S": [0, 1]}, {"S": [1, 0]}, censored={"S": [False, True]}),
     "limit of quantitation"),
    (lambda: figures.time_course_figure({}, {"S": [1.0]}), "no sampling times"),
    (lambda: figures.time_course_figure({"S": [0]}, {"S": ["a"]}), "not numbers"),
    (lambda: figures.probability_vs_ph_figure(PH, PH, 0.9), "outside 0..1"),
    (lambda: figures.probability_vs_ph_figure(PH, 0 * PH, 1.5), "level out of range"),
    (lambda: figures.probability_vs_ph_figure(PH, 0 * PH, 0.9, window=(8, 7)), "not an interval"),
    (lambda: figures.probability_map_figure(PH, [1, 2], np.zeros((3, 3))), "shape does not match"),
    (lambda: figures.trace_figure(np.zeros((5, 2, 2)), ["a"]), "one name per parameter"),
    (lambda: figures.trace_figure(np.zeros((5, 2, 1)), ["a"], burn_in=9), "burn-in outside"),
    (lambda: figures.corner_figure(np.full((5, 2), np.nan), ["a", "b"]), "NaN"),
    (lambda: figures.correlation_figure([[1, 2], [2, 1]], ["a", "b"]), "outside -1..1"),
    (lambda: figures.residuals_figure([0, np.inf], [0, 0], [0, 0], ["S", "S"]), "infinity"),
])
def test_bad_arrays_raise_input_errors(call, match):
    with pytest.raises(InputError, match=match):
        call()


def test_profile_threshold_is_the_chi_square_quantile():
    # Raue et al. 2009, eq. 9: the 95 % threshold is the chi-square quantile with 1 degree of freedom;
    # NIST/SEMATECH e-Handbook of Statistical Methods, table 1.3.6.7.4: 3.841 for 1 dof at 0.95.
    assert figures.PROFILE_THRESHOLD_95 == pytest.approx(3.841, abs=5e-4)
