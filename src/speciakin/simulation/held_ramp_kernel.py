"""Coefficients of a held-pH run under a temperature ramp, carried as cubics in temperature.

With the pH held, every coefficient of the mass-action path (``segment_kernel``)
depends on time through the temperature alone, and inside a segment the
temperature is linear in time.  The coefficients are linear in a few functions
of the temperature, given the segment's feeds and temperature slope (d =
titrant charge + excess / titrant concentration, see ``smooth_rhs_kernel``):

    k_eff,s(T);  u_m = zbar_m / d;  1/d;  e = ([H+] - [OH-]) / d;
    g_m = (d zbar_m/dT) / d;  o = (d[OH-]/dT) / d;  ratio(T),

    alpha_s = -(sum_m nu_sm u_m + (sum_ions z nu_s) / d),
    beta = -(e dV/dt_feed + sum_m u_m feed_m + (sum_ions z feed) / d),
    gamma_m = -(dT/dt) g_m,   gamma_V = (dT/dt) o.

So these functions are fitted as cubics in the temperature on the pieces of
the run's temperature range (each positive k_eff as the cubic of its
logarithm; four Chebyshev points and a check at the middle, as the cubics in
time of ``segment_kernel``, to the same :data:`segment_kernel.COEFFICIENT_RTOL`),
and each segment's cubics in time are their exact compositions with the
segment's straight temperature.  The range is first one piece, then, while a
piece fails its check, 2, 4 or 8 equal pieces (fitted when a segment reaches
them); a segment ends a sub-segment where its temperature crosses into the
next piece.  So a run pays a few speciations for its whole temperature range
instead of five per sub-segment.  When 8 pieces still fail (a wide range), the
run falls back to the cubics in time of ``segment_kernel``.

Only the kernel variant for campaigns with such a run compiles this module's
functions (``batch_kernel.batch_tasks`` with ``held_ramp`` True; the flag is
chosen from the runs by ``simulation.api.kernel_variant``).
"""

from __future__ import annotations

import math

import numpy as np

from speciakin.simulation.jit_options import leaf_kernel
from speciakin.simulation.layout import C_DOH_DT, C_PH, C_PKW, WS_CACHE, WS_DZBAR_DT, WS_ZBAR
from speciakin.simulation.rhs_kernel import speciation_at
from speciakin.simulation.smooth_rhs_kernel import effective_constants, fit_cubics
from speciakin.simulation.speciation_kernel import exp10

#: State of a piece's fit: not made yet, usable, failed its check.
FIT_NONE = 0.0
FIT_OK = 1.0
FIT_FAILED = -1.0
#: Most pieces of a run's temperature range (a power of two); ``tstate`` = (level, low, high,
#: state of each piece), level -1: cubics in time instead.
MAX_PIECES = 8


@leaf_kernel
def basis_size(n_steps, n_mol):
    """Number of temperature functions carried (see the module notes)."""
    return n_steps + 2 * n_mol + 4


@leaf_kernel
def temperature_basis(temperature, ph, model, par, ws, titrant, titrant_conc, second, second_conc, out):
    """The functions of the module notes at ``temperature`` [K] and the held ``ph`` into ``out``
    (speciation in ``ws``); False on failure."""
    n_mol = model.n_mol
    n_steps = model.step_logk_q.shape[0]
    # controlled, with a non-zero slope: d zbar/dT and d[OH-]/dT are wanted too.  The flag as a plain
    # int64 (a literal 1 would be typed Literal[int](1) and compile a second variant of speciation_at,
    # linked and optimised again in every caller up to batch_tasks, beside time_speciation's)
    if math.isnan(speciation_at(temperature, ph, model, par, np.int64(1), 1.0, ws)):
        return False
    effective_constants(model, ws, out)
    cache = ws[WS_CACHE]
    zbar = ws[WS_ZBAR]
    dzdt = ws[WS_DZBAR_DT]
    excess = exp10(-cache[C_PH]) - exp10(cache[C_PH] - cache[C_PKW])
    inv_d = 1.0 / (model.species_charge[titrant] + excess / titrant_conc)
    for m in range(n_mol):
        out[n_steps + m] = zbar[m] * inv_d
        out[n_steps + n_mol + 3 + m] = dzdt[m] * inv_d
    out[n_steps + n_mol] = inv_d
    out[n_steps + n_mol + 1] = excess * inv_d
    out[n_steps + n_mol + 2] = cache[C_DOH_DT] * inv_d
    ratio = 0.0
    if second >= 0:
        ratio = (model.species_charge[titrant] + excess / titrant_conc) / (model.species_charge[second]
                                                                          + excess / second_conc)
    out[n_steps + 2 * n_mol + 3] = ratio
    return True


@leaf_kernel
def fit_temperature_cubics(t_low, t_high, ph, model, par, ws, titrant, titrant_conc, second, second_conc,
                           nodes_x, from_nodes, rtol, tpoly, tlogs, tnodes, tscale):
    """Fit the cubics ``tpoly`` in x = (T - mid) / half of the temperature functions on
    [t_low, t_high] [K]; returns the piece's state (:data:`FIT_OK` or :data:`FIT_FAILED`),
    NaN when a speciation failed."""
    n_b = tpoly.shape[0]
    n_steps = model.step_logk_q.shape[0]
    mid = 0.5 * (t_low + t_high)
    half = 0.5 * (t_high - t_low)
    for node in range(4):
        if not temperature_basis(mid + half * nodes_x[node], ph, model, par, ws, titrant, titrant_conc, second,
                                 second_conc, tnodes[node]):
            return math.nan
    fit_cubics(tnodes, n_steps, from_nodes, tpoly, tlogs, tscale)
    worst = 0.0
    # the check at the middle (x = 0), where a smooth function's cubic errs most
    if not temperature_basis(mid, ph, model, par, ws, titrant, titrant_conc, second, second_conc, tnodes[0]):
        return math.nan
    for c in range(n_b):
        scale = tscale[c]
        exact = tnodes[0, c]
        value = math.exp(tpoly[c, 0]) if tlogs[c] else tpoly[c, 0]
        error = abs(value - exact)
        if error > 0.0:
            worst = max(worst, error / (rtol * (abs(exact) if tlogs[c] else scale)))
    return FIT_OK if worst <= 1.0 else FIT_FAILED


@leaf_kernel(inline="always")
def _composed(tpoly, c, shift, stretch, poly, row, weight):
    """poly[row, :] += weight * (cubic c of tpoly at x_T = shift + stretch x), as a cubic in x."""
    a0 = tpoly[c, 0]
    a1 = tpoly[c, 1]
    a2 = tpoly[c, 2]
    a3 = tpoly[c, 3]
    poly[row, 0] += weight * (a0 + shift * (a1 + shift * (a2 + shift * a3)))
    poly[row, 1] += weight * stretch * (a1 + shift * (2.0 * a2 + shift * 3.0 * a3))
    poly[row, 2] += weight * stretch * stretch * (a2 + 3.0 * a3 * shift)
    poly[row, 3] += weight * stretch * stretch * stretch * a3


@leaf_kernel
def segment_cubics(tpoly, tlogs, piece_mid, piece_half, temperature_mid, temperature_slope, half, nu, n_mol,
                   species_charge, feed_rate, feed_volume_rate, poly, in_logs):
    """The cubics in x = (t - mid) / half of a sub-segment's coefficients (layout of
    ``smooth_rhs_kernel.segment_coefficients``) from the temperature cubics of a piece
    (centre and half width [K]); the sub-segment's temperature is ``temperature_mid`` [K]
    at its middle and moves by ``temperature_slope`` [K/s]."""
    n_steps = nu.shape[0]
    n_species = nu.shape[1]
    shift = (temperature_mid - piece_mid) / piece_half
    stretch = temperature_slope * half / piece_half
    for c in range(poly.shape[0]):
        in_logs[c] = False
        for a in range(4):
            poly[c, a] = 0.0
    u0 = n_steps
    inv_d = n_steps + n_mol
    for s in range(n_steps):
        _composed(tpoly, s, shift, stretch, poly, s, 1.0)
        in_logs[s] = tlogs[s]
        row = n_steps + s
        ions = 0.0
        for j in range(n_mol, n_species):
            ions += species_charge[j] * nu[s, j]
        for m in range(n_mol):
            if nu[s, m] != 0.0:
                _composed(tpoly, u0 + m, shift, stretch, poly, row, -nu[s, m])
        if ions != 0.0:
            _composed(tpoly, inv_d, shift, stretch, poly, row, -ions)
    row = 2 * n_steps
    ions = 0.0
    for j in range(n_mol, n_species):
        ions += species_charge[j] * feed_rate[j]
    if feed_volume_rate != 0.0:
        _composed(tpoly, inv_d + 1, shift, stretch, poly, row, -feed_volume_rate)
    for m in range(n_mol):
        if feed_rate[m] != 0.0:
            _composed(tpoly, u0 + m, shift, stretch, poly, row, -feed_rate[m])
    if ions != 0.0:
        _composed(tpoly, inv_d, shift, stretch, poly, row, -ions)
    for m in range(n_mol):
        _composed(tpoly, inv_d + 3 + m, shift, stretch, poly, row + 1 + m, -temperature_slope)
    _composed(tpoly, inv_d + 2, shift, stretch, poly, row + 1 + n_mol, temperature_slope)
    _composed(tpoly, inv_d + 3 + n_mol, shift, stretch, poly, row + 2 + n_mol, 1.0)



@leaf_kernel
def temperature_range(temp_v, temp_n):
    """(lowest, highest) temperature [K] of a run's profile."""
    low = temp_v[0]
    high = temp_v[0]
    for i in range(1, temp_n):
        low = min(low, temp_v[i])
        high = max(high, temp_v[i])
    return low, high


@leaf_kernel
def temperature_piece(t_a, t1, span, temp_a, temperature_slope, ph, model, par, ws, titrant, titrant_conc, second,
                      second_conc, nodes_x, from_nodes, rtol, tpoly, tlogs, tnodes, tscale, tstate):
    """(status, piece, end of the sub-segment [s]) for a sub-segment of a held-pH ramp that starts at
    ``t_a`` [s] with temperature ``temp_a`` [K] in a segment ending at ``t1``: the piece of the range
    its temperature moves into (fitted here when new; finer pieces while a piece fails its check),
    and the time it leaves that piece.  Piece -1: cubics in time instead; status False: a
    speciation failed."""
    low = tstate[1]
    high = tstate[2]
    while tstate[0] >= 0.0:
        n_pieces = 1 << int(tstate[0])
        width = (high - low) / n_pieces
        # the piece the temperature moves into (a start on a boundary belongs to the piece ahead)
        x = (temp_a - low) / width + (1e-6 if temperature_slope > 0.0 else -1e-6)
        piece = min(max(int(math.floor(x)), 0), n_pieces - 1)
        state = tstate[3 + piece]
        if state == FIT_NONE:
            state = fit_temperature_cubics(low + piece * width, low + (piece + 1) * width, ph, model, par, ws,
                                           titrant, titrant_conc, second, second_conc, nodes_x, from_nodes, rtol,
                                           tpoly[piece], tlogs[piece], tnodes, tscale)
            if math.isnan(state):
                return False, -1, t1
            tstate[3 + piece] = state
        if state == FIT_OK:
            edge = low + (piece + 1) * width if temperature_slope > 0.0 else low + piece * width
            t_b = t_a + (edge - temp_a) / temperature_slope
            if t_b >= t1 - 1e-9 * span:
                t_b = t1
            return True, piece, t_b
        # a piece failed its check: finer pieces for the rest of the run (or cubics in time)
        if n_pieces >= MAX_PIECES:
            tstate[0] = -1.0
        else:
            tstate[0] += 1.0
            for p in range(MAX_PIECES):
                tstate[3 + p] = FIT_NONE
    return True, -1, t1
