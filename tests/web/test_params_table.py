"""Unit tests of the pure functions behind the parameter table and the results views (no browser).

The model file is a copy of the bundled INVENTED demo's.
"""

from __future__ import annotations

import dataclasses
import difflib

import numpy as np
import pytest

from speciakin.chemistry.modelfile import parse_model
from speciakin.chemistry.modelfile.overrides import ParameterOverride, apply_overrides_text, written_value
from speciakin.demo import demo_dir
from speciakin.errors import InputError
from speciakin.web.page_results import correlation_of, parameter_rows as result_rows
from speciakin.web.params_table import (DEFAULT_PRIOR, diff_lines, edited_overrides, parameter_rows, parse_prior,
                                        proposed_text)


@pytest.fixture(scope="module")
def text():
    return (demo_dir() / "model.toml").read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def rows(text):
    return parameter_rows(text, "model.toml", demo_dir())


def _row(rows, name):
    return next(r for r in rows if r["name"] == name)


def _edited(rows, name, **cells):
    return [dict(r, **cells) if r["name"] == name else dict(r) for r in rows]


def test_rows_follow_the_model_and_show_what_the_file_writes(text, rows):
    model = parse_model(text, "model.toml", demo_dir())
    assert [r["name"] for r in rows] == [q.name for q in model.quantities() if q.name]
    k = _row(rows, "log10k[acylation_aryl]")
    assert (k["fit"], k["start"], k["lower"], k["upper"], k["prior"]) == (True, "1 L/(mol*s)", "-3.0", "3.0",
                                                                          DEFAULT_PRIOR)
    assert _row(rows, "pKa[S.OH]")["fit"] is False and _row(rows, "pKa[S.OH]")["start"] == "10.5"
    assert "spread = 0.5" in _row(rows, "pKa[S.N_aryl]")["note"]
    w = _row(rows, "W[S.N_alkyl~N_aryl]")
    assert w["locked"] and w["prior"] == ""
    assert written_value(text, "W[S.N_alkyl~N_aryl]") is None
    assert written_value(text, "pKa[S.N_aryl]") == {"value": 4.9, "fit": True, "lower": -1.5, "upper": 1.0,
                                                    "spread": 0.5}


def test_unchanged_rows_give_no_override(rows):
    assert edited_overrides(rows, [dict(r) for r in rows]) == []


def test_edits_become_overrides_read_as_the_model_file_reads_them(rows):
    edited = _edited(rows, "pKa[S.OH]", fit=True, lower="-0.5", upper="0.5")
    edited = [dict(r, start="20 L/(mol*s)") if r["name"] == "log10k[acylation_alkyl]" else r for r in edited]
    found = edited_overrides(rows, edited)
    assert found == [ParameterOverride("pKa[S.OH]", fit=True, lower=-0.5, upper=0.5),
                     ParameterOverride("log10k[acylation_alkyl]", start="20 L/(mol*s)")]


@pytest.mark.parametrize("cells, words", [
    ({"lower": ""}, "lower bound is empty"),
    ({"start": " "}, "start value is empty"),
    ({"fit": "yes"}, "fitted must be ticked or not"),
    ({"prior": "cauchy"}, "unknown prior family"),
])
def test_unreadable_cells_are_refused_naming_the_parameter(rows, cells, words):
    with pytest.raises(InputError) as err:
        edited_overrides(rows, _edited(rows, "pKa[S.N_aryl]", **cells))
    assert "pKa[S.N_aryl]" in str(err.value) and words in str(err.value)


def test_a_locked_row_cannot_be_changed(rows):
    with pytest.raises(InputError, match="cannot be changed in the table"):
        edited_overrides(rows, _edited(rows, "W[S.N_alkyl~N_aryl]", start="0.9"))


def test_prior_numbers_named_or_in_the_family_order():
    assert parse_prior("x", "normal", "mean=1.5, sd=1") == {"family": "normal", "mean": 1.5, "sd": 1.0}
    assert parse_prior("x", "student_t", "4, 0, 0.3") == {"family": "student_t", "degrees_of_freedom": 4.0,
                                                          "mean": 0.0, "scale": 0.3}
    assert parse_prior("x", DEFAULT_PRIOR, "anything") == {}
    with pytest.raises(InputError, match="needs sd"):
        parse_prior("x", "normal", "mean=1")
    with pytest.raises(InputError, match="has no parameter 'scale'"):
        parse_prior("x", "normal", "mean=1, scale=2")
    with pytest.raises(InputError, match="is not a number"):
        parse_prior("x", "normal", "mean=one, sd=2")


def test_the_model_files_rules_refuse_a_bad_bound_with_its_message(text, rows):
    bad = edited_overrides(rows, _edited(rows, "pKa[S.N_aryl]", lower="2"))
    with pytest.raises(InputError) as err:
        proposed_text(text, bad, "model.toml", demo_dir())
    message = str(err.value)
    assert "pKa[S.N_aryl]" in message and "lower bound is not below the upper bound" in message
    # a prior the registry's constraints refuse (sd must be > 0), with the reader's message
    with pytest.raises(InputError, match="pKa\\[S.N_aryl\\]"):
        proposed_text(text, [ParameterOverride("pKa[S.N_aryl]", prior={"family": "normal", "mean": 0, "sd": -1})],
                      "model.toml", demo_dir())


def test_a_prior_replaces_the_spread_and_the_default_removes_it(text):
    new = proposed_text(text, [ParameterOverride("pKa[S.N_aryl]", prior={"family": "normal", "mean": 0.2,
                                                                         "sd": 0.3})], "model.toml", demo_dir())
    q = {q.name: q for q in parse_model(new, "model.toml", demo_dir()).quantities()}["pKa[S.N_aryl]"]
    assert (q.prior.family, q.prior.parameters) == ("normal", {"mean": 0.2, "sd": 0.3})
    assert "spread" not in written_value(new, "pKa[S.N_aryl]")
    back = apply_overrides_text(new, [ParameterOverride("pKa[S.N_aryl]", prior={})])
    assert "prior" not in written_value(back, "pKa[S.N_aryl]")
    # without spread or prior a fitted pKa shift gets the documented default normal(0, 0.5)
    q = {q.name: q for q in parse_model(back, "model.toml", demo_dir()).quantities()}["pKa[S.N_aryl]"]
    assert (q.prior.family, q.prior.parameters) == ("normal", {"mean": 0.0, "sd": 0.5})


def test_diff_is_the_unified_diff_of_difflib(text):
    new = text.replace("pka = 10.5", "pka = 10.4", 1)
    lines = diff_lines(text, new)
    # reference: the standard library's unified diff of the same texts
    assert lines == list(difflib.unified_diff(text.splitlines(), new.splitlines(), "model.toml (on disk)",
                                              "model.toml (after saving)", lineterm=""))
    assert "-pka = 10.5" in lines and "+pka = 10.4" in lines
    assert diff_lines(text, text) == []


def test_correlation_comes_from_the_fit_else_from_posterior_samples():
    fit = {"correlation": {"names": ["a", "b"], "matrix": [[1.0, 0.3], [0.3, 1.0]]}}
    names, matrix, source = correlation_of(fit)
    assert names == ["a", "b"] and matrix[0, 1] == 0.3 and source == "least-squares covariance"
    # no covariance (null in fit.json): the posterior samples' correlation; samples drawn from a
    # bivariate normal with correlation 0.8 (analytic value), 20000 draws: standard error
    # (1 - rho^2) / sqrt(n) = 0.0025 (Fisher's large-sample formula)
    rng = np.random.default_rng(7)
    cov = [[1.0, 0.8 * 2.0], [0.8 * 2.0, 4.0]]
    samples = rng.multivariate_normal([0, 0], cov, size=20000)
    posterior = dataclasses.make_dataclass("P", ["samples", "parameter_names"])(samples, ["a", "b"])
    broken = {"correlation": {"names": ["a", "b"], "matrix": [[None, None], [None, None]]}}
    names, matrix, source = correlation_of(broken, posterior)
    assert source == "posterior samples" and matrix[0, 1] == pytest.approx(0.8, abs=5 * 0.0025)
    assert correlation_of(broken) is None


def test_result_rows_add_the_posterior_median_and_credible_interval():
    fit = {"parameters": [{"name": "a", "unit": "-", "value": 1.0, "standard_error": 0.1,
                           "covariance_interval": [0.8, 1.2]}]}
    posterior = {"summary": [{"name": "a", "median": 1.01, "lower_95": 0.79, "upper_95": 1.25, "r_hat": 1.05}]}
    row = result_rows(fit, posterior)[0]
    assert (row["posterior"], row["credible"]) == ("1.01", "0.79 to 1.25")
    assert "R-hat 1.050" in row["note"]
    assert result_rows(fit)[0]["posterior"] == "not sampled"


def test_curve_figure_draws_the_band_and_names_compounds_escaped():
    from speciakin.palette import SpeciesColors
    from speciakin.pipeline.predictions import Observation, RunPrediction
    from speciakin.web.figures import fit_run_figure

    t = np.linspace(0.0, 10.0, 5)
    run = RunPrediction("R<1>", "HPLC area", "area%", time=t, values={"P": t}, low={"P": t - 1},
                        high={"P": t + 1}, n_band=150)
    seen = [Observation("R<1>", 2.0, "P", "P", 2.1, False, 0.05, 2.0, 0.3, "area%")]
    fig = fit_run_figure(run, seen, SpeciesColors(["P"]), {"P": "<b>amide</b>"})
    band, line, points = fig.data
    assert band.fill == "toself" and list(band.y) == [*(t + 1), *(t - 1)[::-1]]
    assert line.name == "&lt;b&gt;amide&lt;/b&gt; fitted" and points.name == "&lt;b&gt;amide&lt;/b&gt; observed"
    assert "R&lt;1&gt;" in fig.layout.title.text and "150 posterior draws" in fig.layout.title.text
