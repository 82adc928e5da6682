"""Molecule-level speciation wrapper."""

import json

import numpy as np
import pytest

from speciakin.chemistry import microstates as ms
from speciakin.chemistry.equilibrium import IonizableSpecies
from speciakin.chemistry.model import Interaction, Molecule, Quantity, Site
from speciakin.chemistry.speciation import molecule_site_arrays, speciate
from speciakin.chemistry.water import vant_hoff_pka
from speciakin.errors import InputError

# invented demo compound: an alkyl amine, an aryl amine and a phenol
DEMO = Molecule(
    "demo-compound",
    (Site("N1", "base", Quantity(9.3), Quantity(45.0, "kJ/mol")),
     Site("N2", "base", Quantity(4.6), Quantity(30.0, "kJ/mol")),
     Site("O", "acid", Quantity(10.1), Quantity(20.0, "kJ/mol"))),
    (Interaction("N1", "N2", Quantity(0.4)), Interaction("N1", "O", Quantity(0.7))),
)


def test_speciate_matches_pure_functions():
    ph = np.linspace(0, 14, 57)
    r = speciate(DEMO, ph)
    w = np.array([[0, 0.4, 0.7], [0.4, 0, 0], [0.7, 0, 0]])
    np.testing.assert_allclose(r.populations, ms.microstate_populations([9.3, 4.6, 10.1], w, ph), rtol=0, atol=0)
    np.testing.assert_allclose(r.site_protonated + r.site_reactive, 1.0, atol=1e-14)
    np.testing.assert_allclose(r.mean_charge, ms.mean_charge([9.3, 4.6, 10.1], w, [1, 1, 0], [0, 0, -1], ph),
                               atol=1e-14)
    assert r.labels[0] == "N1 N2 O-" and len(r.labels) == 8
    assert r.macroscopic_pka.shape == (3,)


def test_speciate_temperature_uses_vant_hoff():
    r = speciate(DEMO, [7.0], temperature=313.15)
    np.testing.assert_allclose(r.site_pka, vant_hoff_pka(np.array([9.3, 4.6, 10.1]), np.array([45.0, 30.0, 20.0]),
                                                         313.15, 298.15))
    assert r.site_pka[0] < 9.3


def test_result_outputs():
    r = speciate(DEMO, np.linspace(2, 12, 11))
    frame = r.to_frame()
    assert frame.shape == (11, 2 + 8 + 3)
    np.testing.assert_allclose(frame[[c for c in frame.columns if c.startswith("x[")]].sum(axis=1), 1.0, atol=1e-12)
    json.dumps(r.to_dict())
    text = r.report()
    for heading in ("Speciation of demo-compound", "Sites", "Macroscopic pKa", "Largest share"):
        assert heading in text


def test_species_from_molecule():
    sp = IonizableSpecies.from_molecule(DEMO)
    assert sp.n_sites == 3
    np.testing.assert_array_equal(sp.charge_protonated, [1, 1, 0])
    np.testing.assert_array_equal(sp.charge_deprotonated, [0, 0, -1])


@pytest.mark.parametrize("molecule, match", [
    (Molecule("x", (Site("N1", "amine", Quantity(9.0)),)), "unknown site kind"),
    (Molecule("x", (Site("N1", "base", Quantity(9.0)), Site("N1", "base", Quantity(4.0)))), "duplicate"),
    (Molecule("x", (Site("N1", "base", Quantity(9.0)),), (Interaction("N1", "N9", Quantity(0.3)),)), "unknown site"),
    (Molecule("x", (Site("N1", "base", Quantity(9.0)),), (Interaction("N1", "N1", Quantity(0.3)),)), "itself"),
])
def test_bad_molecules(molecule, match):
    with pytest.raises(InputError, match=match):
        molecule_site_arrays(molecule)


def test_molecule_without_sites():
    with pytest.raises(InputError, match="no ionizable site"):
        speciate(Molecule("salt"), [7.0])


def test_results_round_trip_through_json():
    # to_dict -> JSON -> from_dict gives back the same numbers (STYLE: results round-trip)
    from speciakin.chemistry.equilibrium import EquilibriumResult, solve_ph
    from speciakin.chemistry.speciation import SpeciationResult
    from speciakin.chemistry.titration import TitrationResult, titrate

    r = speciate(DEMO, np.linspace(0, 14, 15), temperature=310.0)
    back = SpeciationResult.from_dict(json.loads(json.dumps(r.to_dict())))
    assert back.to_dict() == r.to_dict()
    np.testing.assert_array_equal(back.populations, r.populations)

    sp = IonizableSpecies.from_molecule(DEMO)
    e = solve_ph([sp], [0.01], -0.005, activity="davies")
    assert EquilibriumResult.from_dict(json.loads(json.dumps(e.to_dict()))).to_dict() == e.to_dict()

    t = titrate([sp], [1e-4], 0.01, "base", 0.1, np.linspace(0, 2e-3, 11), -0.02)
    back_t = TitrationResult.from_dict(json.loads(json.dumps(t.to_dict())))
    assert back_t.to_dict() == t.to_dict()
    assert back_t.report() == t.report()
