"""Specifications on HPLC area% (outcome kind ``area%``).

Area% as the lab's HPLC method reports them: a peak's area is the amount
times the compound's relative response factor, divided by the total area of
the compounds (Snyder, L. R., Kirkland, J. J. and Dolan, J. W.,
"Introduction to Modern Liquid Chromatography", 3rd ed., Wiley 2010, ch. 11),
with the RRFs of the campaign's Compounds sheet.  The campaign is the
INVENTED example of ``speciakin new --example``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from speciakin.data import example
from speciakin.decision.outcomes import area_percent, process_outcome_names
from speciakin.decision.specs import AREA_PREFIX, Specification, evaluate_specs, specification_value

AREA_SPEC = '''
[[specification]]
label = "N-alkyl amide by HPLC"
outcome = "area%"
species = "ALKYL_AMIDE"
rule = "<= 3 %"
'''


def test_area_percent_by_hand():
    # 2 mmol A (RRF 1.0), 1 mmol B (RRF 2.0), 1 mmol C (RRF 0.5): areas 2, 2, 0.5 of 4.5
    got = area_percent(np.array([[2.0, 1.0, 1.0], [0.0, 0.0, 0.0]]), [1.0, 2.0, 0.5])
    np.testing.assert_allclose(got[0], [100 * 2 / 4.5, 100 * 2 / 4.5, 100 * 0.5 / 4.5], rtol=1e-15)
    assert np.all(np.isnan(got[1]))          # nothing on the column: no area%


def test_an_area_spec_reads_the_area_columns():
    table = {"PA": np.array([5.0, 8.0]), AREA_PREFIX + "PA": np.array([4.0, 7.5]),
             AREA_PREFIX + "PB": np.array([1.0, 2.0])}
    spec = Specification("area%", ("PA", "PB"), "<=", 7.0, label="impurities by HPLC")
    np.testing.assert_allclose(specification_value(table, spec), [5.0, 9.5])
    assert evaluate_specs(table, [spec]).tolist() == [True, False]
    assert spec.describe() == "impurities by HPLC: HPLC area% of PA + PB <= 7 %"
    assert spec.outcome_keys() == (AREA_PREFIX + "PA", AREA_PREFIX + "PB")
    assert Specification.from_dict(spec.to_dict()) == spec


@pytest.fixture(scope="module")
def campaign_folder(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("area") / "example"
    example.new_example(folder)
    with open(folder / "process.toml", "a", encoding="utf-8") as f:
        f.write(AREA_SPEC)
    return folder


def test_the_window_takes_area_percent_with_the_workbooks_rrfs(campaign_folder):
    # the example's HPLC reports SUB (RRF 1), ARYL_AMIDE (1.2) and ALKYL_AMIDE (1.1), each carrying the
    # substrate core once: their area% follow from their mole % by the RRF formula
    from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.window import window_draws, window_for_campaign

    model, campaign, process = load_inputs(resolve_inputs(campaign_folder, need_process=True))
    objective = make_objective(model, campaign)
    fit = fit_campaign(objective, profiles=False)
    draws, source, _ = window_draws(fit=fit, n=40, seed=3)
    window = window_for_campaign(objective, process, draws, source, fit=fit)
    rrf = {c.molecule: c.rrf for c in campaign.compounds}
    assert rrf == {"SUB": 1.0, "ARYL_AMIDE": 1.2, "ALKYL_AMIDE": 1.1}
    hplc = list(rrf)
    assert window.outcome_names == process_outcome_names(model, process, rrf)
    assert window.outcome_names[-3:] == [AREA_PREFIX + m for m in hplc]
    mole = np.stack([window.outcome_median[m] for m in hplc], axis=-1)
    want = 100.0 * mole * [1.0, 1.2, 1.1] / np.sum(mole * [1.0, 1.2, 1.1], axis=-1, keepdims=True)
    # medians over draws of a monotone map agree up to the draws' spread; the band is narrow here
    np.testing.assert_allclose(window.outcome_median[AREA_PREFIX + "ALKYL_AMIDE"], want[:, 2], atol=0.02)
    # the spec counts: the area% limit of 3 % is tighter than the mole % limit of 5 %
    p_area = window.probability
    process_wo = type(process)(**{**process.__dict__, "specifications": process.specifications[:2]})
    without = window_for_campaign(objective, process_wo, draws, source, fit=fit)
    assert np.all(p_area <= without.probability + 1e-12) and np.any(p_area < without.probability)
    assert not any(n.startswith(AREA_PREFIX) for n in without.outcome_names)


def test_an_area_spec_must_name_a_molecule_the_hplc_reports(campaign_folder, tmp_path):
    # ACID (the reagent's acid) is a model molecule the example's HPLC does not report: an area% limit on
    # it is an error at the specification's key and line, in `check` and before any fit
    import shutil

    from speciakin.errors import InputError
    from speciakin.pipeline import load_inputs, resolve_inputs
    from speciakin.pipeline.inputs import check_inputs

    folder = shutil.copytree(campaign_folder, tmp_path / "acid")
    text = (folder / "process.toml").read_text(encoding="utf-8").replace(
        'species = "ALKYL_AMIDE"\nrule = "<= 3 %"', 'species = "ACID"\nrule = "<= 3 %"')
    (folder / "process.toml").write_text(text, encoding="utf-8")
    report = check_inputs(folder / "campaign.xlsx", folder / "model.toml", folder / "process.toml")
    (error,) = report.errors
    assert error.code == "not_in_hplc" and error.value == "ACID"
    assert error.location.key == "specification[3].species" and error.location.line == text.splitlines().index(
        'species = "ACID"') + 1
    assert "ALKYL_AMIDE, ARYL_AMIDE, SUB" in error.expected
    with pytest.raises(InputError, match="HPLC does not report"):
        load_inputs(resolve_inputs(folder, need_process=True))
