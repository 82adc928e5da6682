"""Figures drawn once per content (report/figures/_memo.py): equal values give the remembered
bytes without drawing again; any changed value, and arguments the digest cannot take, draw anew."""

from __future__ import annotations

import numpy as np

from speciakin.report.figures import _memo, corner_figure


def counting():
    calls = []

    @_memo.remembered
    def draw(values, names, burn_in=0, extra=None):
        calls.append(1)
        return f"png {len(calls)}".encode()

    return draw, calls


def test_equal_values_are_drawn_once():
    draw, calls = counting()
    chain = np.arange(24.0).reshape(3, 4, 2)
    first = draw(chain, ["a", "b"], burn_in=1)
    again = draw(chain.copy(), ["a", "b"], burn_in=1)  # another array with the same values
    assert again == first and len(calls) == 1


def test_any_changed_value_draws_again():
    draw, calls = counting()
    chain = np.arange(24.0).reshape(3, 4, 2)
    draw(chain, ["a", "b"], burn_in=1)
    changed = chain.copy()
    changed[2, 3, 1] = np.nextafter(changed[2, 3, 1], np.inf)  # one value, one bit
    variants = [(changed, ["a", "b"], 1), (chain, ["a", "c"], 1), (chain, ["a", "b"], 2),
                (chain.astype(np.float32), ["a", "b"], 1), (chain.reshape(3, 8, 1), ["a", "b"], 1)]
    for values, names, burn in variants:
        draw(values, names, burn_in=burn)
    assert len(calls) == 1 + len(variants)
    assert draw(chain, ["a", "b"], burn_in=1) == b"png 1"  # the first is still remembered


def test_mappings_in_their_order_and_unknown_arguments():
    draw, calls = counting()
    draw({"x": [1.0, 2.0], "y": [3.0]}, [])
    draw({"y": [3.0], "x": [1.0, 2.0]}, [])  # another order is another figure (panels in that order)
    assert len(calls) == 2
    marker = object()
    draw([1.0], [], extra=marker)
    draw([1.0], [], extra=marker)  # a value the digest cannot take: never remembered
    assert len(calls) == 4


def test_only_the_last_few_are_kept():
    draw, calls = counting()
    for i in range(_memo.MAX_REMEMBERED + 1):
        draw([float(i)], [])
    draw([float(_memo.MAX_REMEMBERED)], [])  # the newest: remembered
    assert len(calls) == _memo.MAX_REMEMBERED + 1
    draw([0.0], [])  # the oldest: forgotten
    assert len(calls) == _memo.MAX_REMEMBERED + 2


def test_a_real_figure_gives_the_same_png():
    samples = np.random.default_rng(3).normal(size=(200, 2))
    corner_figure.forget()
    first = corner_figure(samples, ["a", "b"])
    assert first[:8] == b"\x89PNG\r\n\x1a\n"
    assert corner_figure(samples.copy(), ["a", "b"]) is first


def test_dataclass_arguments_by_their_fields():
    from speciakin.palette import SpeciesColors

    draw, calls = counting()
    draw([1.0], [], extra=SpeciesColors(["S", "P"]))
    draw([1.0], [], extra=SpeciesColors(["S", "P"]))  # another object with equal fields
    assert len(calls) == 1
    draw([1.0], [], extra=SpeciesColors(["P", "S"]))  # other colours for the same names: another figure
    draw([1.0], [], extra=SpeciesColors(["S", "P"], aliases={"s": "S"}))
    assert len(calls) == 3


def test_a_call_that_changes_its_arguments_is_not_remembered():
    from speciakin.palette import SpeciesColors

    calls = []

    @_memo.remembered
    def draw(names, colors):
        calls.append(1)
        return ",".join(colors.color(n) for n in names).encode()

    first_colors = SpeciesColors(["S"])
    first = draw(["S", "P"], first_colors)  # learns "P"
    assert first_colors.species == ["S", "P"]
    second_colors = SpeciesColors(["S"])
    assert draw(["S", "P"], second_colors) == first and len(calls) == 2  # drawn again, not taken from memory
    assert second_colors.species == ["S", "P"]  # so this palette learned "P" as well
    known = SpeciesColors(["S", "P"])
    draw(["S", "P"], known)
    draw(["S", "P"], SpeciesColors(["S", "P"]))  # nothing learned: remembered
    assert len(calls) == 3


def test_time_courses_and_residuals_are_remembered():
    from speciakin.palette import SpeciesColors
    from speciakin.report.figures import residuals_figure, time_course_figure

    grid = np.linspace(0.0, 60.0, 31)
    args = ({"S": [0.0, 10.0]}, {"S": [1.0, 0.6]}, grid, {"S": np.exp(-0.05 * grid)})
    time_course_figure.forget()
    first = time_course_figure(*args, SpeciesColors(["S"]), title="Run 1")
    assert time_course_figure(*args, SpeciesColors(["S"]), title="Run 1") is first
    assert time_course_figure(*args, SpeciesColors(["S"]), title="Run 2") is not first
    residuals_figure.forget()
    values = ([0.0, 10.0], [1.0, 0.5], [0.1, -0.2], ["S", "S"])
    assert residuals_figure(*values, SpeciesColors(["S"])) is residuals_figure(*values, SpeciesColors(["S"]))
