"""Peaks the model does not describe (impurities, unknowns), marked 'not modelled' in the Compounds sheet.

Area% divide each peak's area by the total area of every peak of the
chromatogram (Snyder, L. R., Kirkland, J. J. and Dolan, J. W., "Introduction
to Modern Liquid Chromatography", 3rd ed., Wiley 2010, ch. 11: area
normalisation), so in a sample with U area% of peaks the model does not
describe, its compounds share 100 - U.  The campaigns here are the INVENTED
example of ``speciakin new --example`` with an invented unknown peak added.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import openpyxl
import pytest

from speciakin.data import example, load_campaign
from speciakin.data.check import check_campaign
from speciakin.data.writer import write_campaign
from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
from speciakin.pipeline.closure import closed_samples, closure_whitening

UNKNOWN = "RRT 0.85"


def _variant(source: Path, folder: Path, share: float, mark: bool = True, kind: str = "area%",
             scale: float = 1.0) -> Path:
    """The example with an unknown peak of ``share`` area% in every sample: the example's area% are
    multiplied by (100 - share) / 100 and rounded to 0.01, as the lab's software reports them; with
    ``mark`` the peak is listed and marked not modelled, without it its rows are left out (the way
    to read such data before).  ``kind`` 'area' writes every value times ``scale`` as a peak area."""
    shutil.copytree(source, folder)
    wb = openpyxl.load_workbook(folder / "campaign.xlsx")
    ws = wb["HPLC results"]
    samples = {}
    for row in ws.iter_rows(min_row=2):
        if row[2].value == "area%" and isinstance(row[4].value, (int, float)):
            row[4].value = round(row[4].value * (100.0 - share) / 100.0, 2) * scale
        row[2].value = kind
        samples.setdefault((row[0].value, row[1].value), None)
    if mark:
        for run, t in samples:
            ws.append([run, t, kind, UNKNOWN, share * scale])
        wb["Compounds"].append([UNKNOWN, "not modelled", None, None, 0.05 * scale, None])
    if scale != 1.0:
        for row in wb["Compounds"].iter_rows(min_row=2):
            if isinstance(row[4].value, (int, float)) and row[0].value != UNKNOWN:
                row[4].value *= scale
    wb.save(folder / "campaign.xlsx")
    return folder


@pytest.fixture(scope="module")
def folders(tmp_path_factory):
    root = tmp_path_factory.mktemp("not_modelled")
    example.new_example(root / "orig")
    return {"orig": root / "orig",
            "marked": _variant(root / "orig", root / "marked", 5.0),
            "dropped": _variant(root / "orig", root / "dropped", 5.0, mark=False),
            "areas": _variant(root / "orig", root / "areas", 5.0, kind="area", scale=10.0)}


def _objective(folder):
    model, campaign, _ = load_inputs(resolve_inputs(folder))
    return make_objective(model, campaign)


def _truth(objective):
    theta = objective.start.copy()
    for name, value in example.TRUTH.items():
        theta[objective.names.index(name)] = value
    return theta


def test_a_peak_marked_not_modelled_is_read_apart_and_written_back(folders, tmp_path):
    campaign = load_campaign(folders["marked"])
    assert [c.name for c in campaign.other_compounds] == [UNKNOWN]
    assert UNKNOWN not in [c.name for c in campaign.compounds]
    for run in campaign.runs:
        h = run.hplc
        assert UNKNOWN not in set(h.compound) and set(h.other.compound) == {UNKNOWN}
        assert np.array_equal(np.unique(h.other.time), h.sample_times)
        assert h.other_share(float(h.sample_times[0]))[0] == pytest.approx(5.0)
    report = check_campaign(folders["marked"])
    assert report.ok and report.not_modelled == {UNKNOWN: len(campaign.runs) * 6}
    assert not [p for p in report.warnings if p.code == "area_sum"]   # every peak counts in the sum
    assert f"{UNKNOWN} (18 values)" in report.report()
    # its rows left out, the samples sum to 95 and the warning says how to list the peak
    sums = [p for p in check_campaign(folders["dropped"]).warnings if p.code == "area_sum"]
    assert sums and "'not modelled'" in sums[0].expected
    # written back with the word the Compounds sheet reads
    write_campaign(campaign, tmp_path / "again.xlsx")
    again = load_campaign(tmp_path / "again.xlsx")
    assert [c.name for c in again.other_compounds] == [UNKNOWN]
    for a, b in zip(campaign.runs, again.runs):
        np.testing.assert_allclose(a.hplc.other.value, b.hplc.other.value)
        np.testing.assert_allclose(a.hplc.value, b.hplc.value)


def test_without_the_mark_the_peak_is_an_error_that_names_the_word(folders, tmp_path):
    folder = shutil.copytree(folders["marked"], tmp_path / "unmarked")
    wb = openpyxl.load_workbook(folder / "campaign.xlsx")
    ws = wb["Compounds"]
    ws.cell(row=ws.max_row, column=2).value = None
    wb.save(folder / "campaign.xlsx")
    report = check_campaign(folder)
    (error,) = report.errors
    assert error.code == "unmapped_compound" and "'not modelled'" in error.expected


def test_the_modelled_compounds_share_what_the_peaks_not_modelled_leave(folders):
    # area normalisation over every peak: with 5 area% of an unknown in each sample the model's area% of
    # the example's compounds are 95 % of those without it, at the samples and on the plotted curves
    orig, marked = _objective(folders["orig"]), _objective(folders["marked"])
    assert np.all(marked.other_share == 5.0) and np.all(orig.other_share == 0.0)
    theta = _truth(orig)
    np.testing.assert_allclose(marked.predict_batch(theta).hplc_model, 0.95 * orig.predict_batch(theta).hplc_model,
                               rtol=1e-12)
    a, b = orig.curves_batch(theta, n_points=31), marked.curves_batch(theta, n_points=31)
    for run in a:
        for compound, values in a[run]["values"].items():
            np.testing.assert_allclose(b[run]["values"][compound], 0.95 * values, rtol=1e-12)
    assert "100 - U" in marked.describe()["conversion"]


def test_peak_areas_count_the_peaks_not_modelled_in_their_total(folders):
    # peak areas are turned into area% over every peak of the sample, the unknown's included
    # (the areas are the marked workbook's area% times 10, so each sample's area% over every peak is
    # value * 100 / S with S the sum of its rounded area%, the unknown's 5.00 included)
    marked, areas = _objective(folders["marked"]), _objective(folders["areas"])
    quantified = np.where(marked.h_cens, 0.0, marked.h_obs)
    total = np.bincount(marked.h_sample, weights=quantified) + marked.other_share
    np.testing.assert_allclose(areas.h_obs, marked.h_obs * 100.0 / total[marked.h_sample], rtol=1e-12)
    np.testing.assert_allclose(areas.other_share, 5.0 * 100.0 / total, rtol=1e-12)
    assert areas.closed_samples == marked.closed_samples > 0


def test_marking_the_peak_recovers_the_fit_without_it_and_leaving_it_out_does_not(folders):
    # The example with a 5 area% unknown in every sample, marked not modelled, fits as the example
    # itself (measured: estimates 1e-4 apart, 0.01 standard errors); its rows left out, the model's
    # area% add up to 100 where the data add up to 95 (measured: reduced chi-square 2.27 against 0.76,
    # HPLC RMS residual 1.9-2.6 against 0.85-0.95, log10 k of the aryl step 0.86 standard errors off)
    from speciakin.pipeline.fit import fit_campaign

    fits = {name: fit_campaign(_objective(folders[name]), profiles=False).fit
            for name in ("orig", "marked", "dropped")}
    ref = {p.name: p for p in fits["orig"].parameters}
    for p in fits["marked"].parameters:
        assert abs(p.value - ref[p.name].value) < 0.05 * ref[p.name].standard_error
    assert fits["marked"].reduced_chisqr == pytest.approx(fits["orig"].reduced_chisqr, rel=0.05)
    assert fits["dropped"].reduced_chisqr > 2.0 * fits["marked"].reduced_chisqr
    off = max(abs(p.value - ref[p.name].value) / ref[p.name].standard_error for p in fits["dropped"].parameters)
    assert off > 0.5


def test_a_sample_closes_with_its_peaks_not_modelled():
    # two modelled values and an unknown of 5.00 area%: the sum of all three is what closes
    sample, area, cens, sigma = np.zeros(2, np.int64), np.ones(2, bool), np.zeros(2, bool), np.array([1.9, 0.9])

    def closed(y, other):
        others = (np.zeros(len(other), np.int64), np.array(other, float), np.zeros(len(other), bool),
                  np.full(len(other), np.nan))
        return bool(closed_samples(sample, 1, np.array(y), area, cens, sigma, None, others)[0])

    assert closed([60.0, 35.0], [5.0]) and closed([60.01, 34.99], [3.0, 2.0])
    # (values to two decimals may miss 100 by 0.005 each)
    assert not closed([60.0, 35.0], []) and not closed([60.0, 35.0], [4.93])
    # one modelled value beside the unknown is no composition to weigh jointly
    assert not closed_samples(np.zeros(1, np.int64), 1, np.array([95.0]), np.ones(1, bool), np.zeros(1, bool),
                              np.ones(1), None, (np.zeros(1, np.int64), np.array([5.0]), np.zeros(1, bool),
                                                 np.full(1, np.nan)))[0]


def test_the_modelled_sub_composition_whitens_to_unit_variance():
    # Monte Carlo: three peaks with independent errors closed to 100 % (the third not modelled); the two
    # modelled values, compared with the model closed to their observed sum, whiten to one residual of
    # unit variance (a composition of K parts has K - 1 degrees of freedom: Aitchison, "The Statistical
    # Analysis of Compositional Data", 1986, ch. 2 and 5)
    y = np.array([60.0, 35.0, 5.0])
    d = np.hypot(0.1, 0.02 * y)
    rng = np.random.default_rng(17)
    noisy = y + rng.standard_normal((200_000, 3)) * d
    closed3 = 100.0 * noisy / noisy.sum(axis=1, keepdims=True)
    modelled = closed3[:, :2]
    r = y[:2] * modelled.sum(axis=1, keepdims=True) / y[:2].sum() - modelled
    _, _, matrix = closure_whitening(np.zeros(2, np.int64), np.array([True]), y[:2], d[:2])
    w = r @ matrix.T
    assert np.all(w[:, 1] == 0.0)
    assert np.var(w[:, 0]) == pytest.approx(1.0, rel=0.02)


def test_the_raw_data_views_draw_the_peaks_not_modelled(folders, tmp_path):
    # the web page's raw-data figure and `speciakin look` show the unknown beside the modelled compounds
    from speciakin.cli.cmd_look import plot_run
    from speciakin.palette import SpeciesColors
    from speciakin.web.figures import raw_run_figure

    campaign = load_campaign(folders["marked"])
    run = campaign.runs[0]
    colors = SpeciesColors([c.molecule for c in campaign.compounds])
    traces = {t.name: t for t in raw_run_figure(run, colors).data}
    unknown = traces[f"{UNKNOWN} (not modelled)"]
    np.testing.assert_allclose(unknown.y, run.hplc.other.value)
    plot_run(run, campaign.compounds, {}, colors, tmp_path / "look.png")
    assert (tmp_path / "look.png").stat().st_size > 0


def test_check_finds_a_value_not_modelled_that_belongs_to_no_sample_and_a_repeated_one(folders, tmp_path):
    # an unknown's value at a time no modelled compound was sampled counts in no sample's total; a second
    # value at the same time would count twice: both are warnings at their rows
    folder = shutil.copytree(folders["marked"], tmp_path / "edited")
    wb = openpyxl.load_workbook(folder / "campaign.xlsx")
    ws = wb["HPLC results"]
    unknown = [row for row in ws.iter_rows(min_row=2) if row[3].value == UNKNOWN]
    unknown[0][1].value = 7            # no sample at 7 min
    first = unknown[1]
    ws.append([first[0].value, first[1].value, "area%", UNKNOWN, 0.2])
    wb.save(folder / "campaign.xlsx")
    warnings = {p.code: p for p in check_campaign(folder).warnings}
    alone = warnings["not_modelled_alone"]
    assert alone.location.row == unknown[0][0].row and alone.value == pytest.approx(7.0)
    assert warnings["duplicate_time"].location.row == ws.max_row
