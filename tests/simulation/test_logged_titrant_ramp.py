"""A logged pH kept by a titrant while the temperature changes: the coefficient cubics must fit.

A falling pH log under a warming ramp ended at t = 0 with "step size became too small"
(status 2): the segment's coefficient cubics were halved without end because one
coefficient (the titrant's term for the hydroxide that the warming frees) carried the
rounding of a central difference of pKw (about 1e-9 relative, the cubics' own tolerance).
d[OH-]/dT now comes from the chain-rule slope of the IAPWS formula, and a coefficient that is
not carried in logarithms is judged against its largest size in the segment.
"""

from __future__ import annotations

import numpy as np
import pytest

from sim_models import T25, two_site_model, two_site_run
from speciakin.chemistry.model import PhControl, TemperatureProfile
from speciakin.simulation import simulate


def _run(drop, warming):
    log = PhControl("logged", log_times=(0.0, 1800.0, 3600.0), log_ph=(8.0, 8.0 - drop / 2, 8.0 - drop),
                    titrant="Na", titrant_concentration=1.0)
    return two_site_run(log, name="falling", end=3600.0,
                        temperature=TemperatureProfile((0.0, 3600.0), (T25, T25 + warming)))


# the cases that failed before (drop [pH], warming [K])
@pytest.mark.parametrize("drop, warming", [(0.05, 1.0), (0.2, 12.0), (0.6, 12.0)])
def test_falling_log_under_a_ramp_is_integrated_to_the_tolerance(drop, warming):
    model = two_site_model()
    times = np.linspace(0.0, 3600.0, 7)
    res = simulate(model, _run(drop, warming), times=times)
    tight = simulate(model, _run(drop, warming), times=times, rtol=1e-10, atol=1e-14)
    # the pH follows the log (straight between readings)
    assert np.allclose(res.ph, np.interp(times, (0.0, 1800.0, 3600.0), (8.0, 8.0 - drop / 2, 8.0 - drop)),
                       atol=1e-12)
    # rtol 1e-6 per step: within 1e-6 of the largest amount of the tight solution (the outside
    # reference, tests/simulation/independent_sim.py, holds 25 C only)
    scale = np.max(np.abs(tight.concentrations))
    assert np.max(np.abs(res.concentrations - tight.concentrations)) / scale < 1e-6
