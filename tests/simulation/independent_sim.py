"""A small independent simulator of controlled-pH runs for the tests (plain scipy).

It shares no code with ``speciakin.simulation``: the charge balance is written
out plainly (Henderson-Hasselbalch fractions of one-site molecules), the
start adjustment is the root of that balance found with scipy's ``brentq``,
and the titrant rates follow from the time derivative of the balance taken
by central differences, integrated with scipy's ``solve_ivp`` (Radau) over the
pieces between the breakpoints of the run.  The convention it implements is the
one stated in docs/model-file.md: acid or base inside the start volume, or
titrant volumes; titrant volumes only add; the opposite titrant is dosed when
the titrant would have to be withdrawn.

Everything here is invented for the tests.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

#: pKw of water at 25 C (IAPWS R11-07 table, 0.1 MPa; from memory).  The project
#: computes its own value from the IAPWS formula; at 25 C they agree to about 1e-3
#: pK, which moves [OH-] (about 1e-7 mol/L near pH 7) by 0.2 %: far below the
#: mmol amounts compared.
PKW_25C = 13.995


@dataclass
class Species:
    """One-site molecule: ``kind`` "base" (charge +1 protonated), "acid"
    (charge -1 deprotonated) or "" (no site)."""

    name: str
    kind: str = ""
    pka: float = 0.0

    def charge(self, ph: float) -> float:
        if self.kind == "base":
            return 1.0 / (1.0 + 10.0 ** (ph - self.pka))
        if self.kind == "acid":
            return -1.0 / (1.0 + 10.0 ** (self.pka - ph))
        return 0.0

    def free_fraction(self, ph: float) -> float:
        """Fraction with the site deprotonated."""
        return 1.0 / (1.0 + 10.0 ** (self.pka - ph)) if self.kind else 1.0


@dataclass
class Scenario:
    """An invented run: amounts [mol], volume [L], times [s]."""

    species: list[Species]
    initial: dict[str, float]
    volume: float
    ph: callable                       # pH(t)
    knots: list[float]                 # breakpoints of pH(t) and of the feeds [s]
    end: float
    k_coupling: float                  # S(free) + E -> P + HA [L/(mol*s)]
    k_water: float                     # E + water -> 2 HA [1/s]
    feeds: list[tuple[str, float, float, float, float]] = field(default_factory=list)
    # (species, amount [mol], start [s], end [s], liquid volume [L])
    k_hydroxide: float = 0.0           # E + OH- -> 2 HA [L/(mol*s)]
    base_conc: float | None = None     # Na+ titrant [mol/L]
    acid_conc: float | None = None     # Cl- titrant [mol/L]
    start: str = "computed"            # computed | titrant


class IndependentRun:
    """Simulate a :class:`Scenario`; columns: species, Na+, Cl-, volume, base used, acid used."""

    def __init__(self, sc: Scenario, rtol: float = 1e-11) -> None:
        self.sc = sc
        self.rtol = rtol
        self.names = [s.name for s in sc.species]
        self.index = {n: i for i, n in enumerate(self.names)}
        self.n = len(self.names)

    # state x: molecule amounts, Na, Cl, base used, acid used; volume follows
    def feed_rates(self, mid: float) -> tuple[np.ndarray, float]:
        """Feed rates [mol/s] and liquid rate [L/s] inside the piece whose midpoint is ``mid``."""
        rates = np.zeros(self.n)
        vol = 0.0
        for name, amount, t0, t1, liquid in self.sc.feeds:
            if t0 <= mid < t1:
                rates[self.index[name]] += amount / (t1 - t0)
                vol += liquid / (t1 - t0)
        return rates, vol

    def fed_volume(self, t: float) -> float:
        total = 0.0
        for _, _, t0, t1, liquid in self.sc.feeds:
            total += liquid * min(max((t - t0) / (t1 - t0), 0.0), 1.0)
        return total

    def volume(self, t: float, x: np.ndarray, v_start: float) -> float:
        sc = self.sc
        v = v_start + self.fed_volume(t)
        if sc.base_conc:
            v += x[self.n + 2] / sc.base_conc
        if sc.acid_conc:
            v += x[self.n + 3] / sc.acid_conc
        return v

    def balance(self, t: float, x: np.ndarray, v_start: float) -> float:
        """Charge balance [mol]: sum n z + Na - Cl + V ([H+] - [OH-])."""
        ph = self.sc.ph(t)
        total = sum(x[i] * s.charge(ph) for i, s in enumerate(self.sc.species))
        total += x[self.n] - x[self.n + 1]
        h = 10.0 ** -ph
        return total + self.volume(t, x, v_start) * (h - 10.0 ** (-PKW_25C) / h)

    def reaction(self, t: float, x: np.ndarray, v_start: float, mid: float) -> np.ndarray:
        sc = self.sc
        ph = sc.ph(t)
        v = self.volume(t, x, v_start)
        c = x[: self.n] / v
        s, e = self.index["S"], self.index["E"]
        r1 = sc.k_coupling * c[s] * sc.species[s].free_fraction(ph) * c[e]
        r2 = sc.k_water * c[e] + sc.k_hydroxide * 10.0 ** (ph - PKW_25C) * c[e]
        d = np.zeros(self.n + 4)
        d[s] -= r1 * v
        d[e] -= (r1 + r2) * v
        d[self.index["P"]] += r1 * v
        d[self.index["HA"]] += (r1 + 2.0 * r2) * v
        d[: self.n] += self.feed_rates(mid)[0]
        return d

    def rhs(self, t: float, x: np.ndarray, v_start: float, a: float, b: float) -> np.ndarray:
        """dx/dt inside the piece [a, b] (feeds and the pH slope are those of the piece)."""
        d = self.reaction(t, x, v_start, 0.5 * (a + b))
        # d/dt of the balance without titrant, by differences inside the piece (the balance is
        # linear in the amounts, so only the pH term carries a truncation error, ~dt^2)
        dt = 1e-3
        lo, hi = max(t - dt, a), min(t + dt, b)
        ddt = (self.balance(hi, x + (hi - t) * d, v_start)
               - self.balance(lo, x + (lo - t) * d, v_start)) / (hi - lo)
        for k, conc in ((self.n + 2, self.sc.base_conc), (self.n + 3, self.sc.acid_conc)):
            if not conc:
                continue
            unit = np.zeros_like(x)
            unit[k] = 1.0
            unit[self.n if k == self.n + 2 else self.n + 1] = 1.0
            h = 1e-6
            slope = (self.balance(t, x + h * unit, v_start) - self.balance(t, x - h * unit, v_start)) / (2 * h)
            rate = -ddt / slope
            # one titrant alone: its rate keeps its sign (the kernel tolerates a withdrawal up to
            # 1e-4 of the run's total amount, such as the water of a feed at the set point)
            if rate >= 0.0 or not (self.sc.base_conc and self.sc.acid_conc):
                d[k] = rate
                d[self.n if k == self.n + 2 else self.n + 1] += rate
                return d
        raise AssertionError("the scenario needs a titrant it does not have")

    def start(self) -> tuple[np.ndarray, float, float]:
        """State and volume at t = 0 after the start adjustment; and the
        adjustment [mol equivalents, + base]."""
        sc = self.sc
        x = np.zeros(self.n + 4)
        for name, amount in sc.initial.items():
            if name == "Na+":
                x[self.n] += amount
            elif name == "Cl-":
                x[self.n + 1] += amount
            else:
                x[self.index[name]] += amount
        v0 = sc.volume

        def trial(e: float) -> tuple[np.ndarray, float]:
            y = x.copy()
            v = v0
            if e >= 0:
                y[self.n] += e
                if sc.start == "titrant":
                    v += e / sc.base_conc
            else:
                y[self.n + 1] += -e
                if sc.start == "titrant":
                    v += -e / sc.acid_conc
            return y, v

        def residual(e: float) -> float:
            y, v = trial(e)
            # the start volume already counts the titrant: pass it through v_start
            return self.balance(0.0, y, v)

        e = brentq(residual, -1.0, 1.0, xtol=1e-18, rtol=1e-14)
        y, v = trial(e)
        return y, v, e

    def simulate(self, times: np.ndarray) -> tuple[np.ndarray, float]:
        """Rows at ``times``: molecules, Na+, Cl-, volume, base used, acid used; and the start adjustment."""
        x, v_start, e = self.start()
        edges = sorted({0.0, self.sc.end, *[k for k in self.sc.knots if 0 < k < self.sc.end]})
        out = np.full((len(times), self.n + 5), np.nan)
        t_all = np.asarray(times, float)
        for a, b in zip(edges[:-1], edges[1:]):
            sol = solve_ivp(self.rhs, (a, b), x, method="Radau", rtol=self.rtol, atol=1e-5 * self.rtol,
                            dense_output=True,
                            args=(v_start, a, b))
            assert sol.success, sol.message
            for j in np.flatnonzero((t_all >= a) & (t_all <= b)):
                xx = sol.sol(t_all[j])
                out[j] = np.concatenate([xx[: self.n + 2], [self.volume(t_all[j], xx, v_start)], xx[self.n + 2:]])
            x = sol.y[:, -1]
        return out, e
