"""Microstate engine against textbook formulas, analytic results and numpy."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from speciakin.chemistry import microstates as ms
from speciakin.errors import InputError


def test_bit_convention():
    # convention of the module docstring: site i protonated when bit i of k is 1
    bits = ms.microstate_bits(3)
    assert bits.shape == (8, 3)
    for k in range(8):
        assert [int(b) for b in bits[k]] == [(k >> i) & 1 for i in range(3)]
    assert ms.bound_protons(3).tolist() == [0, 1, 1, 2, 1, 2, 2, 3]


def test_single_site_is_henderson_hasselbalch():
    # analytic: protonated fraction of one site = 1 / (1 + 10**(pH - pKa))
    ph = np.linspace(-2, 16, 181)
    got = ms.site_protonated_fraction([7.3], None, ph)[:, 0]
    np.testing.assert_allclose(got, 1.0 / (1.0 + 10.0 ** (ph - 7.3)), rtol=1e-13, atol=1e-300)
    free = ms.site_reactive_fraction([7.3], None, ph, 0)
    np.testing.assert_allclose(free, 1.0 / (1.0 + 10.0 ** (7.3 - ph)), rtol=1e-13)


def _diprotic_alphas(ph, ka1, ka2):
    # Harris, Quantitative Chemical Analysis, chapter "Polyprotic acid-base
    # equilibria" (fractional composition of a diprotic system):
    # D = h^2 + Ka1 h + Ka1 Ka2; alpha(H2A) = h^2/D, alpha(HA) = Ka1 h/D, alpha(A) = Ka1 Ka2/D
    h = 10.0 ** (-ph)
    d = h * h + ka1 * h + ka1 * ka2
    return h * h / d, ka1 * h / d, ka1 * ka2 / d


@pytest.mark.parametrize("w", [0.0, 0.4, 1.5])
def test_two_sites_match_diprotic_alpha_formulas(w):
    # Microscopic -> macroscopic constants for two sites a, b with interaction W
    # (Ullmann, J. Phys. Chem. B 2003, 107, 1263; also any textbook treatment of
    # microscopic constants): from the fully protonated state each site loses its
    # proton with pK = pKa - W, so Ka1 = k_a' + k_b' = 10**-(pa-W) + 10**-(pb-W);
    # the last proton leaves from either singly protonated state:
    # 1/Ka2 = 1/k_a + 1/k_b = 10**pa + 10**pb.
    pa, pb = 9.3, 4.6
    ka1 = 10.0 ** -(pa - w) + 10.0 ** -(pb - w)
    ka2 = 1.0 / (10.0**pa + 10.0**pb)
    ph = np.linspace(0, 14, 141)
    inter = np.array([[0.0, w], [w, 0.0]])
    pop = ms.microstate_populations([pa, pb], inter, ph)
    a2, a1, a0 = _diprotic_alphas(ph, ka1, ka2)
    np.testing.assert_allclose(pop[:, 3], a2, rtol=1e-11, atol=1e-15)
    np.testing.assert_allclose(pop[:, 1] + pop[:, 2], a1, rtol=1e-11, atol=1e-15)
    np.testing.assert_allclose(pop[:, 0], a0, rtol=1e-11, atol=1e-15)
    np.testing.assert_allclose(ms.macroscopic_pkas([pa, pb], inter), [-np.log10(ka1), -np.log10(ka2)],
                               rtol=0, atol=1e-12)


def test_binding_polynomial_of_independent_sites_matches_numpy_poly():
    # independent sites: P(h) = prod_i (1 + K_i h), K_i = 10**pKa_i, so B_j are the
    # elementary symmetric polynomials of the K_i: numpy.poly(-K) gives them
    # (numpy reference implementation).
    pka = np.array([2.1, 4.6, 7.7, 9.3, 10.4])
    # np.poly(-K) = coefficients of prod(x + K_i), highest power first: e_0, e_1, ..., e_n,
    # which are exactly B_0..B_n of prod(1 + K_i h)
    expected = np.poly(-(10.0**pka))
    got = ms.binding_polynomial_log_coefficients(pka)
    np.testing.assert_allclose(got, np.log10(expected), rtol=0, atol=1e-12)


def test_aryl_protonated_alkyl_free_microstate_negligible():
    # Common practice: anilinium-type site pKa 4.6 and
    # benzylammonium-type site 9.3 (CRC Handbook, aqueous 25 C, from memory);
    # the microstate with the aryl site protonated and the alkyl site free is
    # negligible (below 1e-4 of the total) at every pH from 0 to 14.
    ph = np.linspace(0, 14, 1401)
    pop = ms.microstate_populations([9.3, 4.6], None, ph)
    labels = ms.microstate_labels(["alkyl", "aryl"], ["base", "base"])
    k = labels.index("alkyl arylH+")
    assert pop[:, k].max() < 1e-4
    # and the ratio to the other singly protonated state is 10**(4.6 - 9.3) (analytic)
    np.testing.assert_allclose(pop[:, k] / pop[:, labels.index("alkylH+ aryl")], 10.0 ** (4.6 - 9.3), rtol=1e-10)


def test_ten_sites_stable_from_ph_minus_two_to_sixteen():
    # stability: 10 sites, pKa 0..14, every pair interacting, pH -2..16
    pka = np.linspace(0, 14, 10)
    inter = np.full((10, 10), 0.3)
    np.fill_diagonal(inter, 0.0)
    ph = np.linspace(-2, 16, 721)
    pop = ms.microstate_populations(pka, inter, ph)
    assert pop.shape == (721, 1024)
    assert np.all(np.isfinite(pop)) and np.all(pop >= 0)
    np.testing.assert_allclose(pop.sum(axis=1), 1.0, rtol=0, atol=1e-12)
    # without interactions the extremes are analytic: fully protonated share at
    # pH -2 is prod_i 1/(1 + 10**(-2 - pKa_i)), fully free at 16 prod_i 1/(1 + 10**(pKa_i - 16))
    ind = ms.microstate_populations(pka, None, np.array([-2.0, 16.0]))
    np.testing.assert_allclose(ind[0, -1], np.prod(1.0 / (1.0 + 10.0 ** (-2.0 - pka))), rtol=1e-12)
    np.testing.assert_allclose(ind[1, 0], np.prod(1.0 / (1.0 + 10.0 ** (pka - 16.0))), rtol=1e-12)
    frac = ms.site_protonated_fraction(pka, inter, ph)
    assert np.all(np.isfinite(frac)) and np.all((frac >= 0) & (frac <= 1 + 1e-12))


def test_mean_charge_of_zwitterion_at_isoelectric_point():
    # analytic: amino-acid-like molecule (base pKa 9.3, acid pKa 2.3, invented,
    # independent sites): mean charge = f_prot(base) - f_free(acid), which is
    # zero at pH = (2.3 + 9.3)/2 by symmetry of the two Henderson-Hasselbalch terms.
    pka = [9.3, 2.3]
    z = ms.mean_charge(pka, None, [1, 0], [0, -1], np.array([0.0, 5.8, 14.0]))
    np.testing.assert_allclose(z[1], 0.0, atol=1e-12)
    np.testing.assert_allclose(z[[0, 2]], [1.0, -1.0], atol=1e-2)
    nbar = ms.mean_bound_protons(pka, None, 5.8)
    np.testing.assert_allclose(nbar, 1.0, atol=1e-12)
    # fixed charge shifts it by a constant
    np.testing.assert_allclose(ms.mean_charge(pka, None, [1, 0], [0, -1], 5.8, fixed_charge=1), 1.0, atol=1e-12)


def test_labels():
    labels = ms.microstate_labels(["N1", "N2", "O"], ["base", "base", "acid"])
    assert labels[0] == "N1 N2 O-"
    assert labels[1] == "N1H+ N2 O-"
    assert labels[7] == "N1H+ N2H+ OH"


@pytest.mark.parametrize("pka, inter, match", [
    ([1.0, np.nan], None, "not finite"),
    ([1.0, 2.0], [[0, 1], [0.5, 0]], "not symmetric"),
    ([1.0, 2.0], [[1, 0], [0, 0]], "diagonal"),
    ([1.0, 2.0], [[0, 1, 0]], "wrong shape"),
    (list(range(13)), None, "1 to 12"),
])
def test_bad_site_arrays(pka, inter, match):
    with pytest.raises(InputError, match=match):
        ms.microstate_populations(pka, inter, 7.0)


def test_bad_labels_and_index():
    with pytest.raises(InputError, match="unknown site kind"):
        ms.microstate_labels(["N1"], ["amine"])
    with pytest.raises(InputError, match="site index"):
        ms.site_reactive_fraction([9.3], None, 7.0, 1)
    with pytest.raises(InputError, match="pH value"):
        ms.microstate_populations([9.3], None, [7.0, np.inf])


pka_lists = st.lists(st.floats(-1, 15, allow_nan=False), min_size=1, max_size=6)


@given(pka=pka_lists, w=st.floats(0, 3), ph=st.floats(-2, 16))
def test_populations_sum_to_one(pka, w, ph):
    n = len(pka)
    inter = np.full((n, n), w)
    np.fill_diagonal(inter, 0.0)
    pop = ms.microstate_populations(pka, inter, ph)
    assert np.all(pop >= 0)
    assert abs(pop.sum() - 1.0) < 1e-12


@given(pka=st.floats(-1, 15), ph=st.lists(st.floats(-2, 16), min_size=2, max_size=20))
def test_isolated_site_free_fraction_rises_with_ph(pka, ph):
    x = np.sort(np.array(ph))
    free = ms.site_reactive_fraction([pka], None, x, 0)
    assert np.all(np.diff(free) >= -1e-15)


@given(pka=pka_lists)
def test_independent_sites_give_ascending_macroscopic_pkas(pka):
    # W = 0: the binding polynomial has real negative roots, so its coefficients
    # are log-concave (Newton's inequalities) and stepwise pKa values ascend.
    got = ms.macroscopic_pkas(pka)
    assert np.all(np.diff(got) >= -1e-9)
    # sum of macroscopic pKa = sum of site pKa (product of constants, Ullmann 2003)
    assert abs(got.sum() - sum(pka)) < 1e-9
