"""A representative report built from synthetic arrays (invented scenario).

The compound "Zelvamide" and every number below are invented for the tests.
"""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.report import (
    BulletList,
    Callout,
    Figure,
    KeyValues,
    Paragraph,
    ReportDocument,
    Section,
    SpeciesColors,
    Table,
    assumptions_section,
    cautions_section,
)
from speciakin.report import figures

DECISION_TEXT = "Run the acylation at pH 7.6 to 8.2; the probability of meeting all specifications is at least 0.95 there."
SPECIES = ["zelvamide", "N-acyl product", "O-acyl impurity", "diacyl impurity"]


def synthetic_figures() -> dict[str, bytes]:
    """PNG bytes of a time course, a probability curve and a correlation map from synthetic arrays."""
    rng = np.random.default_rng(7)
    colors = SpeciesColors(SPECIES)
    grid = np.linspace(0.0, 120.0, 121)
    k = 0.04  # invented first-order rate [1/min]
    model = {
        SPECIES[0]: 100.0 * np.exp(-k * grid),
        SPECIES[1]: 90.0 * (1 - np.exp(-k * grid)),
        SPECIES[2]: 8.0 * (1 - np.exp(-k * grid)),
        SPECIES[3]: 2.0 * (1 - np.exp(-k * grid)) ** 2,
    }
    t_obs = np.array([0, 5, 10, 20, 40, 60, 90, 120], float)
    observed_time = {s: t_obs for s in SPECIES}
    observed = {s: np.interp(t_obs, grid, y) * (1 + 0.02 * rng.standard_normal(t_obs.size)) for s, y in model.items()}
    censored = {SPECIES[3]: observed[SPECIES[3]] < 0.5}
    ph = np.linspace(6.0, 10.0, 81)
    probability = np.exp(-0.5 * ((ph - 7.9) / 0.45) ** 4)
    corr = np.array([[1.0, 0.8, -0.3], [0.8, 1.0, 0.1], [-0.3, 0.1, 1.0]])
    return {
        "time_course": figures.time_course_figure(
            observed_time, observed, grid, model, colors, censored=censored, loq={SPECIES[3]: 0.5},
            band_low={s: 0.95 * y for s, y in model.items()}, band_high={s: 1.05 * y for s, y in model.items()},
            title="Run R3, pH 8.0 (invented data)"),
        "probability": figures.probability_vs_ph_figure(ph, probability, 0.95, window=(7.6, 8.2),
                                                        robust_window=(7.7, 8.1)),
        "correlation": figures.correlation_figure(corr, ["log10 k1", "log10 k2", "pKa1"]),
    }


def build_document(long_table_rows: int = 60) -> ReportDocument:
    pngs = synthetic_figures()
    parameters = Table(
        "Fitted parameters", ["parameter", "estimate", "standard error", "at bound"],
        [["log10 k1", 2.3514, 0.0412, "no"], ["log10 k2", 0.8123, 0.1034, "no"],
         ["pKa1", 8.412, 0.021, "no"], ["pKa2", 10.05, None, "yes"]],
        units=[None, None, None, None], note="Invented values for the test scenario.",
        formats=[None, ".4f", ".3g", None])
    data_rows = [[f"R{1 + i % 4}", 5.0 * i, 100.0 * np.exp(-0.03 * i), 100.0 * np.exp(-0.03 * i) + 0.1,
                  0.1 if i % 2 else -0.1] for i in range(long_table_rows)]
    data = Table("Data and fitted values", ["run", "time", "observed", "fitted", "residual"], data_rows,
                 units=[None, "min", "mol%", "mol%", "mol%"], formats=[None, ".1f", ".2f", ".2f", ".3f"],
                 sheet_name="data")
    window = Table("pH window", ["quantity", "low", "high"],
                   [["window", 7.6, 8.2], ["robust window", 7.7, 8.1]], units=[None, "pH", "pH"])
    sections = [
        Section("Decision", [
            Callout("decision", "Recommended pH window", DECISION_TEXT),
            KeyValues([("Recommended pH", "7.6 - 8.2"), ("Probability level", 0.95), ("Runs used", 4)]),
            Figure(pngs["probability"], "Probability that all specifications are met against pH.",
                   "probability curve"),
        ]),
        Section("Fit", [
            Paragraph("Global least-squares fit of four invented runs of zelvamide with acetic anhydride."),
            parameters,
            Callout("warning", "pKa2 at its bound", "The data do not constrain pKa2; it sits at its upper bound."),
            Figure(pngs["time_course"], "Run R3: data, model and 5-95 % band.", "time course"),
            Figure(pngs["correlation"], "Parameter correlations.", "correlation matrix",
                   width_fraction=0.6),
        ]),
        Section("Data", [data, BulletList(["Four runs at pH 7.0, 7.5, 8.0 and 8.5.", "Samples quenched in acid."])]),
        assumptions_section(["pKa2 is not constrained by the data (profile open above)."]),
        cautions_section(),
    ]
    return ReportDocument("Zelvamide acylation: pH window", sections,
                          subtitle="Invented demonstration scenario", command="speciakin report campaign/",
                          created="2026-05-04T10:30:00+00:00",
                          tables_for_workbook=[parameters, data, window])


@pytest.fixture(scope="session")
def document() -> ReportDocument:
    return build_document()


@pytest.fixture(scope="session")
def rendered(tmp_path_factory, document):
    """The representative document in every format: {format name: path}."""
    from speciakin.report import render_all

    return render_all(document, tmp_path_factory.mktemp("report"), stem="zelvamide")


@pytest.fixture(scope="session")
def decision_text() -> str:
    return DECISION_TEXT
