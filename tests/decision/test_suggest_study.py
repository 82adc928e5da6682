"""Does the top-ranked run help more than a random one?  A simulation study.

Each synthetic campaign (invented, tests/decision/suggest_synthetic.py) draws
its truth (pKa of N_a 7.5-9.5, log10 k_a 1-2, log10 k_b -0.3-0.3) and three
low set points at random, is fitted, and gets a suggestion.  Then the top
candidate and one other candidate chosen at random from the same grid are each
added as a run simulated from the truth with the campaign's noise, the
campaign is refitted, and the 90 % credible width of the two window edges is
measured on draws from the new fit (the window's own fallback draws, the same
random numbers for both, so that the comparison is not blurred by Monte Carlo
noise).  The count of campaigns where the top run leaves the narrower edges is
the figure of merit; docs/suggest.md reports it.

The random run is drawn uniformly from the other candidates taken in grid
order (so it does not depend on the ranking).  The widths are compared as
computed (continuous: each draw's edge is the interpolated zero of its spec
margin, not a grid or bisection step): a win is a strictly narrower width, a
tie (equal widths) is not a win.

The slow version runs 20 campaigns (issue 17's target: the top run strictly
narrower in >= 80 %); the default suite runs 3 and asserts that the top run
always narrows the edges and never leaves them wider than the random one by
more than the "helps much" threshold.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "estimation"))

from campaign_synthetic import SAMPLE_TIMES, synthetic_campaign  # noqa: E402
from suggest_synthetic import COMPOUNDS, build  # noqa: E402

from speciakin.pipeline.window import process_outcome_function, window_draws  # noqa: E402
from speciakin.decision.design import process_scan_arguments  # noqa: E402
from speciakin.decision.outcomes import process_outcome_names  # noqa: E402
from speciakin.decision.suggest import credible_width, decision_draws, draw_edges  # noqa: E402
from speciakin.pipeline.suggest import candidate_runs, suggest_for_campaign, template_index  # noqa: E402
from speciakin.pipeline.fit import fit_campaign  # noqa: E402
from speciakin.pipeline.objective import CampaignObjective  # noqa: E402
from speciakin.errors import SolverError  # noqa: E402

N_DRAWS = 300
#: Least-squares starts per fit.  On the flat ridge of a low-pH campaign the least-squares fit
#: sometimes stops with "gradient not small" for every start (about one campaign in four, seen
#: with 4 starts); such campaigns are left out and counted.
STARTS = 4


def edge_width(objective, fit, process, anchor_ph: float | None = None) -> tuple[float, float]:
    """Summed 90 % credible width of the two window edges [pH] on covariance draws (seed 11)."""
    draws, _, _ = window_draws(fit, None, N_DRAWS, 11)
    args = process_scan_arguments(process)
    outcomes = process_outcome_function(objective, process)(draws, args["ph_grid"])
    decision = decision_draws(args["ph_grid"], outcomes, args["specs"],
                              process_outcome_names(objective.model, process))
    edges = draw_edges(decision)
    return sum(credible_width(edges[:, k]) for k in (0, 1)), float(decision.ph[decision.anchor])


def one_campaign(k: int) -> dict | None:
    """One campaign of the study; None when a least-squares fit fails (counted apart)."""
    rng = np.random.default_rng(1000 + k)
    truth = {"pKa[S.N_a]": rng.uniform(7.5, 9.5), "log10k[acyl_a]": rng.uniform(1.0, 2.0),
             "log10k[acyl_b]": rng.uniform(-0.3, 0.3)}
    setpoints = tuple(float(x) for x in sorted(rng.choice([3.0, 3.5, 4.0, 4.5, 5.0, 5.5, 6.0], size=3,
                                                          replace=False)))
    model, campaign, process = build(setpoints, seed=k, truth=truth)
    objective = CampaignObjective(model, campaign)
    try:
        fit = fit_campaign(objective, starts=STARTS, profiles=False)
    except SolverError:
        return None
    result = suggest_for_campaign(objective, fit=fit, process=process, n_draws=N_DRAWS, seed=k)
    top = result.candidates[0]
    # the random run: uniform over the other candidates in grid order (not in ranked order, so
    # that the comparison run does not depend on the ranking)
    others = sorted((c for c in result.candidates if c.index != top.index), key=lambda c: c.index)
    pick = others[int(rng.integers(len(others)))]
    before, _ = edge_width(objective, fit, process)
    widths = {}
    for label, cand in (("top", top), ("random", pick)):
        runs, _ = candidate_runs(objective, [cand.conditions], template_index(objective), SAMPLE_TIMES)
        extended = synthetic_campaign(model, list(model.runs) + runs, truth, SAMPLE_TIMES, COMPOUNDS, seed=k)
        obj2 = CampaignObjective(model, extended)
        try:
            widths[label] = edge_width(obj2, fit_campaign(obj2, starts=STARTS, profiles=False), process)[0]
        except SolverError:
            return None
    return {"campaign": k, "truth_pka": truth["pKa[S.N_a]"], "setpoints": setpoints,
            "top_ph": top.conditions["setpoint_pH"], "random_ph": pick.conditions["setpoint_pH"],
            "before": before, "top": widths["top"], "random": widths["random"],
            "expected_reduction": top.edge_reduction, "helps": result.helps}


def summary(rows: list[dict]) -> str:
    lines = [f"{'k':>3} {'pKa':>5} {'runs':>16} {'top':>5} {'rand':>5} {'before':>7} {'w_top':>8} {'w_rand':>8} "
             f"{'helps':>5}"]
    for r in rows:
        lines.append(f"{r['campaign']:>3} {r['truth_pka']:5.2f} {str(r['setpoints']):>16} {r['top_ph']:5.1f} "
                     f"{r['random_ph']:5.1f} {r['before']:7.3f} {r['top']:8.5f} {r['random']:8.5f} "
                     f"{str(r['helps']):>5}")
    wins, ties, losses = tally(rows)
    lines.append(f"top strictly narrower than random in {wins} of {len(rows)} campaigns; equal in {ties}; "
                 f"wider in {losses}")
    return "\n".join(lines)


def tally(rows: list[dict]) -> tuple[int, int, int]:
    """(wins, ties, losses): the top run's summed edge width strictly below, equal to, above the random run's."""
    wins = sum(r["top"] < r["random"] for r in rows)
    ties = sum(r["top"] == r["random"] for r in rows)
    return wins, ties, len(rows) - wins - ties


def run_study(n: int, most: int) -> tuple[list[dict], int]:
    """Campaigns k = 0, 1, ... until ``n`` complete (at most ``most`` tried); rows and failed fits."""
    rows, failed, k = [], 0, 0
    while len(rows) < n and k < most:
        row = one_campaign(k)
        k += 1
        if row is None:
            failed += 1
        else:
            rows.append(row)
    return rows, failed


def test_top_run_is_never_clearly_worse_short():
    rows, _ = run_study(3, 5)
    assert len(rows) == 3
    print(summary(rows))
    for r in rows:
        assert r["top"] <= r["random"] + 0.1, summary(rows)
        assert r["top"] < r["before"], summary(rows)


@pytest.mark.slow
def test_top_run_beats_a_random_run_in_most_campaigns():
    rows, failed = run_study(20, 40)
    print(summary(rows))
    print(f"campaigns whose least-squares fit failed (left out): {failed}")
    assert len(rows) == 20
    wins, _, _ = tally(rows)
    # issue 17's target: the top run leaves strictly narrower window edges than a random candidate
    # in >= 80 % of the campaigns (a tie is not a win)
    assert wins >= 0.8 * len(rows), summary(rows)
