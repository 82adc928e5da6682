"""Status codes of the compiled kernel (0 = success) and their meaning.

Every compiled function that can fail returns one of these codes; the
batch result keeps them per (set, run), :func:`~speciakin.simulation.api.simulate`
raises on them.
"""

from __future__ import annotations

STATUS_OK = 0
STATUS_MAX_STEPS = 1
STATUS_STEP_UNDERFLOW = 2
STATUS_NOT_FINITE = 3
STATUS_SINGULAR = 4
STATUS_VOLUME = 5
STATUS_TITRANT_SIGN = 6
STATUS_NO_ADJUSTING_ION = 7
STATUS_NOT_COMPILED = 8
STATUS_RAMP_NOT_COMPILED = 9

#: Human-readable meaning of each status code.
STATUS_TEXT = {
    STATUS_OK: "ok",
    STATUS_MAX_STEPS: "maximum number of integration steps exceeded",
    STATUS_STEP_UNDERFLOW: "step size became too small (the equations are too stiff or discontinuous)",
    STATUS_NOT_FINITE: "the right-hand side is not finite (charge balance has no root or a value overflowed)",
    STATUS_SINGULAR: "singular iteration matrix",
    STATUS_VOLUME: "the volume became zero or negative (withdrawals exceed the liquid present)",
    STATUS_TITRANT_SIGN: "the titrant cannot hold the pH: it would have to be withdrawn (the opposite "
                         "reagent is needed: give an opposite titrant, or adjust the start solution)",
    STATUS_NO_ADJUSTING_ION: "the start solution needs acid or base to reach the pH, and no ion of that "
                             "sign is named for the start adjustment",
    STATUS_NOT_COMPILED: "a free-pH run was given to the kernel variant compiled without the free-pH path "
                         "(an error of the caller: simulation.api chooses the variant from the runs)",
    STATUS_RAMP_NOT_COMPILED: "a held-pH run under a temperature ramp was given to the kernel variant compiled "
                              "without the held-pH ramp's path (an error of the caller: simulation.api chooses "
                              "the variant from the runs)",
}
