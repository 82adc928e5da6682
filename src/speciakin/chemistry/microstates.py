"""Protonation microstates of a molecule with several ionizable sites.

Pure numpy functions, vectorised over any array of pH values.

Conventions (fixed; the compiled simulator kernel follows them too)
------------------------------------------------------------------
* A molecule has ``n`` sites (1 <= n <= 12) and ``2**n`` microstates.
* Microstate index ``k`` runs over ``0 .. 2**n - 1``; site ``i`` is
  protonated in microstate ``k`` when bit ``i`` of ``k`` is 1:
  ``s_i = (k >> i) & 1``.  So ``k = 0`` is the fully deprotonated state and
  ``k = 2**n - 1`` the fully protonated one.
* ``pka`` is a length-``n`` array of site pKa values [-]; ``interaction`` is
  an ``(n, n)`` symmetric matrix ``W`` [pK units] with zero diagonal, or None
  (no interaction).  ``W_ij > 0`` lowers the apparent pKa of site ``i`` by
  ``W_ij`` when site ``j`` is protonated (charge repulsion).
* Site-binding (Ising-type) weight of microstate ``s``::

      log10 w(s) = sum_i s_i (pKa_i - pH) - sum_{i<j} s_i s_j W_ij

  split into a pH-independent part ``c(s) = sum_i s_i pKa_i - sum_{i<j} s_i
  s_j W_ij`` and ``- m(s) pH`` with ``m(s) = sum_i s_i`` the number of bound
  protons.  Populations are ``w(s) / sum_s w(s)``, evaluated by log-sum-exp
  (largest log-weight subtracted) so that nothing overflows anywhere in
  pH -2 .. 16.
* Each bound proton adds exactly +1 to the charge (both site kinds in
  :data:`speciakin.chemistry.model.SITE_KINDS` differ by one unit), so the
  mean charge is ``fixed + sum_i z_deprot_i + mean bound protons``.

References
----------
.. [1] Borkovec, M.; Koper, G. J. M. "Ising models of polyprotic acids and
   bases." J. Phys. Chem. 1992, 96, 6038-6045.
.. [2] Ullmann, G. M. "Relations between protonation constants and titration
   curves in polyprotic acids: a critical view." J. Phys. Chem. B 2003, 107,
   1263-1271.
"""

from __future__ import annotations

import numpy as np

from speciakin.chemistry.model import SITE_KINDS
from speciakin.errors import InputError, Location

__all__ = [
    "MAX_SITES",
    "microstate_bits",
    "bound_protons",
    "microstate_constant_log_weights",
    "microstate_log_weights",
    "microstate_populations",
    "site_protonated_fraction",
    "site_reactive_fraction",
    "mean_bound_protons",
    "microstate_charges",
    "mean_charge",
    "binding_polynomial_log_coefficients",
    "macroscopic_pkas",
    "microstate_labels",
    "check_site_arrays",
]

#: Largest number of sites per molecule (2**12 = 4096 microstates).
MAX_SITES = 12

LN10 = float(np.log(10.0))


def microstate_bits(n: int) -> np.ndarray:
    """Protonation pattern of every microstate.

    Parameters
    ----------
    n
        Number of sites, 0 <= n <= 12.

    Returns
    -------
    numpy.ndarray
        Integer array of shape ``(2**n, n)``; element ``[k, i]`` is
        ``(k >> i) & 1`` (1 = site i protonated in microstate k).
    """
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or not 0 <= n <= MAX_SITES:
        raise InputError("number of sites out of range", Location(key="sites"), n,
                         f"an integer from 0 to {MAX_SITES}")
    k = np.arange(2 ** int(n), dtype=np.int64)
    return ((k[:, None] >> np.arange(int(n), dtype=np.int64)[None, :]) & 1).astype(np.int64)


def bound_protons(n: int) -> np.ndarray:
    """Number of bound protons ``m(s)`` of each microstate, shape ``(2**n,)``."""
    return microstate_bits(n).sum(axis=1)


def check_site_arrays(pka, interaction=None) -> tuple[np.ndarray, np.ndarray]:
    """Validate ``pka`` and ``interaction``; return them as float arrays.

    Parameters
    ----------
    pka
        Site pKa values, shape ``(n,)``, finite.
    interaction
        ``(n, n)`` symmetric, zero diagonal, finite [pK units]; None = zeros.

    Returns
    -------
    (pka, interaction)
        ``float64`` arrays of shapes ``(n,)`` and ``(n, n)``.

    Raises
    ------
    InputError
        On a wrong shape, a non-finite value, an asymmetric matrix or a
        non-zero diagonal.
    """
    p = np.atleast_1d(np.asarray(pka, dtype=float))
    if p.ndim != 1 or not 1 <= p.size <= MAX_SITES:
        raise InputError("pKa values must be a list of 1 to 12 numbers", Location(key="pka"),
                         p.shape, f"shape (n,) with 1 <= n <= {MAX_SITES}")
    if not np.all(np.isfinite(p)):
        raise InputError("pKa value is not finite", Location(key="pka"), p.tolist(), "finite numbers")
    n = p.size
    if interaction is None:
        w = np.zeros((n, n))
    else:
        w = np.asarray(interaction, dtype=float)
        if w.shape != (n, n):
            raise InputError("interaction matrix has the wrong shape", Location(key="interaction"),
                             w.shape, f"({n}, {n})")
        if not np.all(np.isfinite(w)):
            raise InputError("interaction value is not finite", Location(key="interaction"),
                             w.tolist(), "finite numbers [pK units]")
        if np.any(np.diag(w) != 0.0):
            raise InputError("interaction matrix diagonal must be zero", Location(key="interaction"),
                             np.diag(w).tolist(), "zeros")
        if not np.allclose(w, w.T, rtol=0.0, atol=1e-12):
            raise InputError("interaction matrix is not symmetric", Location(key="interaction"),
                             w.tolist(), "W[i, j] == W[j, i]")
    return p, w


def microstate_constant_log_weights(pka, interaction=None) -> np.ndarray:
    """pH-independent part ``c(s)`` of the log10 weights, shape ``(2**n,)``.

    ``c(s) = sum_i s_i pKa_i - sum_{i<j} s_i s_j W_ij``; the full log10
    weight at a pH is ``c(s) - m(s) * pH``.

    References
    ----------
    Borkovec and Koper 1992 (module references), site-binding model.
    """
    p, w = check_site_arrays(pka, interaction)
    s = microstate_bits(p.size).astype(float)
    # sum_{i<j} s_i s_j W_ij = 0.5 * s^T W s because W is symmetric, zero diagonal
    return s @ p - 0.5 * np.einsum("ki,ij,kj->k", s, w, s)


def _as_ph(ph) -> np.ndarray:
    x = np.asarray(ph, dtype=float)
    if not np.all(np.isfinite(x)):
        raise InputError("pH value is not finite", Location(key="ph"), x.tolist() if x.size < 10 else "array",
                         "finite numbers")
    return x


def microstate_log_weights(pka, interaction, ph) -> np.ndarray:
    """log10 of the unnormalised microstate weights, shape ``ph.shape + (2**n,)``.

    References
    ----------
    Borkovec and Koper 1992, site-binding (Ising) model (module references).
    """
    c = microstate_constant_log_weights(pka, interaction)
    m = bound_protons(np.size(pka)).astype(float)
    x = _as_ph(ph)
    return c - x[..., None] * m


def _small_dot(g: np.ndarray, table: np.ndarray) -> np.ndarray:
    """``g @ table`` for a short inner axis, as a loop of vector operations
    (no BLAS threads: predictable speed on a busy machine)."""
    out = np.multiply(g[..., 0, None], table[0])
    tmp = np.empty_like(out)
    for j in range(1, table.shape[0]):
        np.multiply(g[..., j, None], table[j], out=tmp)
        out += tmp
    return out


def _grouped_weights(pka, interaction, ph):
    """Weights grouped by the number of bound protons.

    Log-sum-exp grouped by ``j = m(s)`` (same result as subtracting the
    largest log-weight, with only ``n + 1`` exponentials per pH)::

        top_j   = max_{m(s)=j} c(s)
        a(s)    = 10**(c(s) - top_{m(s)})                  <= 1
        G_j(pH) = 10**(top_j - j pH - max_j'(top_j' - j' pH)) <= 1
        population(s) = a(s) G_{m(s)}(pH) / sum_s' a(s') G_{m(s')}(pH)

    Returns
    -------
    (g, a, m)
        ``g = G / sum`` of shape ``ph.shape + (n + 1,)`` (so that the
        population of s is ``g[..., m(s)] * a(s)``), ``a`` of shape
        ``(2**n,)`` and ``m`` of shape ``(2**n,)``.
    """
    c = microstate_constant_log_weights(pka, interaction)
    m = bound_protons(np.size(pka))
    x = _as_ph(ph)
    top = np.full(m.max() + 1, -np.inf)
    np.maximum.at(top, m, c)
    a = np.exp(LN10 * (c - top[m]))
    lg = top - x[..., None] * np.arange(top.size, dtype=float)
    lg -= lg.max(axis=-1, keepdims=True)
    lg *= LN10
    g = np.exp(lg, out=lg)
    group_sum = np.zeros(top.size)
    np.add.at(group_sum, m, a)
    g /= _small_dot(g, group_sum[:, None])
    return g, a, m


def _group_table(a: np.ndarray, m: np.ndarray, columns: np.ndarray) -> np.ndarray:
    """``T[j, i] = sum_{s: m(s)=j} a(s) columns[s, i]``, shape ``(n + 1, columns.shape[1])``."""
    out = np.zeros((m.max() + 1, columns.shape[1]))
    np.add.at(out, m, a[:, None] * columns)
    return out


def microstate_populations(pka, interaction, ph) -> np.ndarray:
    """Fraction of the molecule in each microstate.

    Parameters
    ----------
    pka
        Site pKa values, shape ``(n,)`` [-].
    interaction
        ``(n, n)`` pairwise penalty ``W`` [pK units] or None.
    ph
        pH values, any shape [-].

    Returns
    -------
    numpy.ndarray
        Shape ``ph.shape + (2**n,)``; each row sums to 1 (log-sum-exp, no
        overflow for any finite pH).

    References
    ----------
    Borkovec and Koper 1992; Ullmann 2003 (module references).
    """
    g, a, m = _grouped_weights(pka, interaction, ph)
    pop = np.take(g, m, axis=-1)
    pop *= a  # in place: no second large temporary
    return pop


def site_protonated_fraction(pka, interaction, ph) -> np.ndarray:
    """Fraction of molecules with each site protonated, shape ``ph.shape + (n,)``.

    Sum of the populations of the microstates with ``s_i = 1``.
    """
    g, a, m = _grouped_weights(pka, interaction, ph)
    return _small_dot(g, _group_table(a, m, microstate_bits(np.size(pka)).astype(float)))


def site_reactive_fraction(pka, interaction, ph, site_index: int) -> np.ndarray:
    """Fraction of molecules with site ``site_index`` deprotonated.

    This is the reactive form: the free base of an amine, the anion of a
    phenol.  Summed directly over the microstates with ``s_i = 0`` (not as
    ``1 - protonated``) so that small fractions keep full relative precision.

    Returns
    -------
    numpy.ndarray
        Shape ``ph.shape`` [-].
    """
    n = np.size(pka)
    if isinstance(site_index, bool) or not isinstance(site_index, (int, np.integer)) \
            or not 0 <= site_index < n:
        raise InputError("site index out of range", Location(key="site_index"), site_index,
                         f"an integer from 0 to {n - 1}")
    g, a, m = _grouped_weights(pka, interaction, ph)
    free = (microstate_bits(n)[:, site_index] == 0).astype(float)
    return _small_dot(g, _group_table(a, m, free[:, None]))[..., 0]


def mean_bound_protons(pka, interaction, ph) -> np.ndarray:
    """Mean number of bound protons, shape ``ph.shape`` [-]."""
    g, a, m = _grouped_weights(pka, interaction, ph)
    return _small_dot(g, _group_table(a, m, m[:, None].astype(float)))[..., 0]


def microstate_charges(charge_protonated, charge_deprotonated, fixed_charge: float = 0.0) -> np.ndarray:
    """Charge of each microstate, shape ``(2**n,)``.

    ``z(s) = fixed + sum_i [s_i z_prot_i + (1 - s_i) z_deprot_i]``.
    """
    zp = np.atleast_1d(np.asarray(charge_protonated, dtype=float))
    zd = np.atleast_1d(np.asarray(charge_deprotonated, dtype=float))
    if zp.shape != zd.shape or zp.ndim != 1:
        raise InputError("site charge lists differ in length", Location(key="charges"),
                         (zp.shape, zd.shape), "one protonated and one deprotonated charge per site")
    s = microstate_bits(zp.size).astype(float)
    return float(fixed_charge) + s @ zp + (1.0 - s) @ zd


def mean_charge(pka, interaction, charge_protonated, charge_deprotonated, ph,
                fixed_charge: float = 0.0) -> np.ndarray:
    """Population-weighted mean charge of the molecule, shape ``ph.shape`` [e].

    Parameters
    ----------
    charge_protonated, charge_deprotonated
        Charge of each site in its two states (base: +1 / 0, acid: 0 / -1).
    fixed_charge
        pH-independent charge (quaternary ammonium: +1).
    """
    z = microstate_charges(charge_protonated, charge_deprotonated, fixed_charge)
    g, a, m = _grouped_weights(pka, interaction, ph)
    return _small_dot(g, _group_table(a, m, z[:, None]))[..., 0]


def binding_polynomial_log_coefficients(pka, interaction=None) -> np.ndarray:
    """log10 of the binding-polynomial coefficients ``B_j``, j = 0..n.

    The binding polynomial is ``P(h) = sum_j B_j h**j`` with ``h = [H+]``
    (activity) and ``B_j = sum_{s: m(s) = j} 10**c(s)``: the cumulative
    (overall) protonation constant of the macrostate with ``j`` bound
    protons.  ``B_0 = 1``.

    References
    ----------
    Ullmann 2003 (module references), binding polynomial.
    """
    c = microstate_constant_log_weights(pka, interaction)
    m = bound_protons(np.size(pka))
    out = np.empty(np.size(pka) + 1)
    for j in range(out.size):
        cj = c[m == j]
        top = cj.max()
        out[j] = top + np.log10(np.sum(10.0 ** (cj - top)))
    return out


def macroscopic_pkas(pka, interaction=None) -> np.ndarray:
    """Macroscopic (titration) pKa values, ascending.

    From the binding polynomial coefficients (see
    :func:`binding_polynomial_log_coefficients`), the stepwise protonation
    constant of step ``j`` (adding the j-th proton) is ``K_j = B_j / B_{j-1}``.
    Acid-dissociation numbering runs the other way: ``pKa_1`` is the loss of
    the first proton from the fully protonated form, so
    ``pKa_m = log10(B_{n-m+1} / B_{n-m})``, m = 1..n.

    For two sites a, b with microscopic constants this gives the textbook
    relations ``Ka1 = k_a' + k_b'`` and ``1/Ka2 = 1/k_a + 1/k_b`` (Ullmann 2003).

    Returns
    -------
    numpy.ndarray
        Shape ``(n,)`` [-], in acid-dissociation order (pKa_1 first).  For
        independent sites (W = 0) the binding polynomial has real negative
        roots, its coefficients are log-concave (Newton's inequalities) and
        the values ascend; with interactions they usually do, but the order is
        not forced and is not re-sorted here.

    References
    ----------
    Ullmann 2003 (module references).
    """
    lb = binding_polynomial_log_coefficients(pka, interaction)
    stepwise = np.diff(lb)  # log10 K_j, j = 1..n (protonation)
    return stepwise[::-1].copy()


def _state_text(name: str, protonated: bool, charge: int) -> str:
    sign = "+" * charge if charge > 0 else "-" * (-charge)
    return f"{name}{'H' if protonated else ''}{sign}"


def microstate_labels(site_names, kinds) -> list[str]:
    """Readable label of each microstate, e.g. ``"N1H+ N2 O-"``.

    Parameters
    ----------
    site_names
        Name of each site.
    kinds
        Kind of each site, keys of :data:`speciakin.chemistry.model.SITE_KINDS`.

    Returns
    -------
    list of str
        ``2**n`` labels in microstate index order.  A protonated site shows
        ``H`` after its name; the sign of the state's charge follows.
    """
    names = [str(s) for s in site_names]
    kinds = [str(k) for k in kinds]
    if len(names) != len(kinds):
        raise InputError("site names and kinds differ in length", Location(key="sites"),
                         (len(names), len(kinds)), "one kind per site")
    for k in kinds:
        if k not in SITE_KINDS:
            raise InputError("unknown site kind", Location(key="kind"), k, ", ".join(SITE_KINDS))
    bits = microstate_bits(len(names))
    labels = []
    for row in bits:
        parts = []
        for i, (name, kind) in enumerate(zip(names, kinds)):
            sk = SITE_KINDS[kind]
            prot = bool(row[i])
            parts.append(_state_text(name, prot, sk.charge_protonated if prot else sk.charge_deprotonated))
        labels.append(" ".join(parts))
    return labels
