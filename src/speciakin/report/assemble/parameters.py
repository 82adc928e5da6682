"""Report sections "Parameters" and "Correlations and identifiability".

The parameter table puts the three readings of each parameter side by side:
least squares with its covariance interval (symmetric, local), the profile
likelihood interval (honest for a nonlinear model; "open" where the profile
never rises above the threshold) and, when a posterior was sampled, its
median and central 95 % credible interval with the prior used.

References
----------
Bates, D. M. and Watts, D. G., "Nonlinear Regression Analysis and Its
Applications", Wiley 1988 (covariance intervals).
Raue, A. et al., Bioinformatics 2009, 25, 1923 (profile likelihood intervals
and practical identifiability).
Gelman, A. et al., "Bayesian Data Analysis", 3rd ed., CRC 2013 (central
credible intervals).
"""

from __future__ import annotations

import re
from typing import Any, Mapping

import numpy as np

from speciakin.pipeline.fit import INACTIVE_WORDS, left_out, objective_closed
from speciakin.report.blocks import as_sentences
from speciakin.report.document import Callout, Figure, KeyValues, Paragraph, Section, Table

__all__ = [
    "natural_value",
    "log_readings_table",
    "shown_name",
    "prior_texts",
    "posterior_rows",
    "parameter_section",
    "parameter_table",
    "interval_table",
    "correlation_section",
    "correlation_table",
    "identifiability_warnings",
    "STRONG_CORRELATION",
]

#: |correlation| above which a pair is named in the report (common practice).
STRONG_CORRELATION = 0.95

#: Largest correlation matrix printed as a table (larger ones: figure and workbook only).
PRINTED_CORRELATION_MAX = 8

#: Default pKa-shift prior sd [pK units] stated when the model file gives none
#: (the estimation layer's default_pka_shift_prior; common practice).
DEFAULT_SHIFT_SD = 0.5


def _default_prior_text(parameter: dict[str, Any]) -> str:
    if parameter.get("shift"):
        return f"normal(mean=0, sd={DEFAULT_SHIFT_SD:g}), default"
    lower, upper = parameter.get("lower"), parameter.get("upper")
    if lower is not None and upper is not None:
        return f"uniform(lower={lower:g}, upper={upper:g}), default"
    return "flat within the bounds, default"


def prior_texts(fit: Any, posterior: Any = None) -> dict[str, str]:
    """Prior of each parameter by display name: the sampler's own text when a
    posterior exists, else the model file's prior or the stated default."""
    out: dict[str, str] = {}
    if posterior is not None and posterior.priors:
        out.update({n: str(p) for n, p in zip(posterior.parameter_names, posterior.priors)})
    if fit is not None:
        for p in fit.objective.get("parameters", []):
            if p["name"] in out:
                continue
            prior = p.get("prior")
            if prior:
                args = ", ".join(f"{k}={v:g}" for k, v in prior.items() if k != "family")
                out[p["name"]] = f"{prior['family']}({args})"
            else:
                out[p["name"]] = _default_prior_text(p)
    return out


def posterior_rows(posterior: Any) -> dict[str, Any]:
    """Posterior summary per parameter name (None when no posterior)."""
    if posterior is None:
        return {}
    return {s.name: s for s in posterior.summary}


def _open_or(value: float | None, is_open: bool, computed: bool) -> Any:
    if not computed:
        return "not computed"
    if is_open or value is None:
        return "open"
    return float(value)


def _names(fit: Any, posterior: Any) -> list[str]:
    if fit is not None:
        return list(fit.names)
    if posterior is not None:
        return list(posterior.parameter_names)
    return []


PARAMETER_COLUMNS = ["parameter", "unit", "least-squares value", "standard error", "covariance 2.5 %",
                     "covariance 97.5 %", "profile 2.5 %", "profile 97.5 %", "posterior median",
                     "credible 2.5 %", "credible 97.5 %", "prior", "implied pKa"]


def parameter_table(fit: Any, posterior: Any = None) -> Table | None:
    """The full parameter table (one row per fitted parameter), or None without results."""
    names = _names(fit, posterior)
    if not names:
        return None
    rows_by_name = {r["name"]: r for r in fit.rows()} if fit is not None else {}
    post = posterior_rows(posterior)
    priors = prior_texts(fit, posterior)
    profiled = bool(fit.profiles) if fit is not None else False
    rows = []
    for name in names:
        r = rows_by_name.get(name)
        s = post.get(name)
        ci = r["covariance_interval"] if r and r["covariance_interval"] else [None, None]
        profile = r["profile_interval"] if r else [None, None]
        rows.append([
            name, r["unit"] if r else None,
            r["value"] if r else None,
            r["standard_error"] if r else None, ci[0], ci[1],
            _open_or(profile[0], r["profile_open_below"], profiled) if r else None,
            _open_or(profile[1], r["profile_open_above"], profiled) if r else None,
            s.median if s else None, s.lower_95 if s else None, s.upper_95 if s else None,
            priors.get(name, "not stated"),
            r["implied_value"] if r and r["shift_of"] is not None else None,
        ])
    note = ("Intervals are 95 %. 'open': the profile likelihood stays below the threshold on that side "
            "within the bounds, so the data do not limit the parameter there. Posterior columns are "
            "empty when no posterior was sampled. For a pKa shift the implied pKa is file value + shift.")
    return Table("Parameters", PARAMETER_COLUMNS, rows, formats=[None, None] + [".4g"] * 10 + [".3f"],
                 note=note, sheet_name="parameters")


def interval_table(fit: Any, posterior: Any = None) -> Table | None:
    """Every interval in long form: parameter, method, lower, upper, open flags."""
    rows = []
    if fit is not None:
        for r in fit.rows():
            ci = r["covariance_interval"]
            rows.append([r["name"], "covariance", ci[0] if ci else None, ci[1] if ci else None, "no", "no"])
            if fit.profiles:
                lo, hi = r["profile_interval"]
                rows.append([r["name"], "profile likelihood", lo, hi,
                             "yes" if r["profile_open_below"] else "no", "yes" if r["profile_open_above"] else "no"])
    if posterior is not None:
        for s in posterior.summary:
            rows.append([s.name, "posterior credible", s.lower_95, s.upper_95, "no", "no"])
    if not rows:
        return None
    return Table("Intervals", ["parameter", "method", "lower 2.5 %", "upper 97.5 %", "open below", "open above"],
                 rows, sheet_name="intervals", note="95 % intervals on the fitted scale.")


def shown_name(name: str, is_shift: bool) -> str:
    """Printed name of a parameter: a pKa fitted as a shift reads "shift of <name>"."""
    return f"shift of {name}" if is_shift else name


def natural_value(row: Mapping[str, Any]) -> str | None:
    """A fitted value on the scale a chemist reads: the absolute pKa of a shift
    ("pKa 9.28"), the rate constant of a log10 k with its unit ("k = 10.9 L/(mol*s)")."""
    value = row.get("value")
    if value is None or not np.isfinite(value):
        return None
    if row.get("shift_of") is not None:
        return f"pKa {row['implied_value']:.2f}"
    unit = str(row.get("unit") or "")
    match = re.fullmatch(r"log10\((.+)\)", unit)
    if match:
        return f"k = {10.0 ** float(value):.3g} {match.group(1)}"
    return None


def log_readings_table(fit: Any) -> Table | Paragraph | None:
    """How many readings of each titrant and pH log entered the fit (None without logs)."""
    if fit is None:
        return None
    objective = getattr(fit, "objective", None) or {}
    entries = objective.get("log_readings") or []
    entries = [e for e in entries if e.get("titrant_readings") or e.get("ph_log_readings")]
    if not entries:
        return Paragraph("Logs: no titrant or pH log entered the fit (runs at held pH without a titrant log, or "
                         "runs without logs).") if "log_readings" in objective else None
    rows = [[str(e.get("run")), int(e.get("titrant_readings", 0)), int(e.get("titrant_used", 0)),
             int(e.get("ph_log_readings", 0)), int(e.get("ph_log_used", 0))] for e in entries]
    thinning = objective.get("log_thinning") or {}
    note = ("Every reading of each log is used" if not thinning else
            "Logs thinned as set in the model file ("
            + ", ".join(f"{k}: every {v}-th reading" for k, v in sorted(thinning.items())) + ")")
    note += "; readings after the run's end time are not used."
    return Table("Log readings used by the fit", ["run", "titrant log readings", "titrant readings used",
                                                  "pH log readings", "pH readings used"], rows, note=note)


def parameter_section(fit: Any, posterior: Any = None) -> Section:
    """The "Parameters" section: least-squares and posterior tables (split for print)."""
    table = parameter_table(fit, posterior)
    if table is None:
        return Section("Parameters", [Paragraph("Least-squares fit: not run. Posterior sampling: not run.")],
                       anchor="parameters")
    blocks: list = []
    if fit is not None:
        st = fit.fit
        blocks.append(KeyValues([("Observations", st.n_residuals), ("Fitted parameters", st.n_varying),
                                 ("Degrees of freedom", st.degrees_of_freedom),
                                 ("Chi-square", st.chisqr), ("Reduced chi-square", st.reduced_chisqr),
                                 ("AIC", st.aic), ("BIC", st.bic), ("Converged", bool(st.success))],
                                number_format=".4g"))
        closed = objective_closed(fit)
        for_closed, other = left_out(st, closed)
        if closed or other:
            less = []
            if closed:
                less.append(f"less {for_closed:.3g} for {closed} HPLC sample{'s' if closed != 1 else ''} "
                            "whose area% sum to 100 (a closed composition has one value fewer that varies freely"
                            + ("; its values are weighed with their joint covariance)" if st.dof_reduction == 0.0
                               else ")"))
            if other:
                less.append(f"less {other} value{'s' if other != 1 else ''} that "
                            f"{INACTIVE_WORDS}: they add nothing to chi-square)")
            blocks.append(Paragraph("Degrees of freedom: observations less fitted parameters, " + ", ".join(less)
                                    + "."))
        logs = log_readings_table(fit)
        if logs is not None:
            blocks.append(logs)
    else:
        blocks.append(Paragraph("Least-squares fit: not run; only posterior columns are filled."))
    cols = table.columns
    col = {c: cols.index(c) for c in cols}
    fit_rows = {r["name"]: r for r in fit.rows()} if fit is not None else {}
    shifts = {n for n, r in fit_rows.items() if r["shift_of"] is not None}

    def shown(row: list) -> str:
        return shown_name(row[col["parameter"]], row[col["parameter"]] in shifts)

    # printed as three narrow tables so that each fits the A4 text width
    blocks.append(Table("Least-squares estimates", ["parameter", "unit", "LS estimate", "std. error",
                                                    "absolute pKa or rate constant"],
                        [[shown(r), r[col["unit"]], r[col["least-squares value"]],
                          r[col["standard error"]], natural_value(fit_rows[r[col["parameter"]]])
                          if r[col["parameter"]] in fit_rows else None] for r in table.rows],
                        formats=[None, None, ".4g", ".3g", None],
                        note="A pKa fitted as a shift from its model-file value is listed as 'shift of pKa[...]'; "
                             "the absolute pKa beside it is the model-file value plus the fitted shift. A rate "
                             "constant fitted as log10 k is shown beside it as k with its unit."))
    if fit is not None and not fit.profiles:
        blocks.append(Paragraph("Profile likelihood: not computed for this fit."))
    blocks.append(Table("95 % intervals", ["parameter", "covariance 95 %", "profile 95 %"],
                        [[shown(r),
                          _interval_text(r[col["covariance 2.5 %"]], r[col["covariance 97.5 %"]]),
                          _interval_text(r[col["profile 2.5 %"]], r[col["profile 97.5 %"]])] for r in table.rows],
                        note="'open': the profile likelihood stays below its threshold on that side within the "
                             "bounds, so the data do not limit the parameter there."))
    if posterior is None:
        blocks.append(Paragraph("Posterior sampling: not run. Priors that a sampling run would use:"))
    blocks.append(Table("Posterior and priors", ["parameter", "posterior median", "credible 95 %", "prior"],
                        [[shown(r), r[col["posterior median"]],
                          _interval_text(r[col["credible 2.5 %"]], r[col["credible 97.5 %"]]),
                          r[col["prior"]]] for r in table.rows],
                        formats=[None, ".4g", None, None],
                        note="Central 95 % credible interval of the kept samples; priors on the fitted scale."))
    return Section("Parameters", blocks, anchor="parameters")


def _interval_text(low: Any, high: Any) -> str | None:
    """``[low, high]`` with 4 significant digits; text ends ("open") kept; None when both are missing."""
    if low is None and high is None:
        return None
    if low == "not computed" or high == "not computed":
        return "not computed"

    def one(v: Any) -> str:
        return "-" if v is None else v if isinstance(v, str) else f"{v:.4g}"

    return f"[{one(low)}, {one(high)}]"


def _correlation(fit: Any, posterior: Any) -> tuple[list[str], np.ndarray, str] | None:
    if fit is not None and fit.fit.covariance is not None:
        cov = np.asarray(fit.covariance, float)
        if cov.size and np.all(np.isfinite(cov)):
            sd = np.sqrt(np.clip(np.diag(cov), 0.0, None))
            with np.errstate(invalid="ignore", divide="ignore"):
                corr = cov / np.outer(sd, sd)
            if np.all(np.isfinite(corr)):
                return list(fit.names), np.clip(corr, -1.0, 1.0), "least-squares covariance"
    if posterior is not None and posterior.samples.shape[0] > 2 and posterior.samples.shape[1] > 1:
        return list(posterior.parameter_names), np.corrcoef(posterior.samples.T), "posterior samples"
    return None


def correlation_table(fit: Any, posterior: Any) -> Table | None:
    """Workbook sheet "correlation" (full parameter names as headers), or None."""
    found = _correlation(fit, posterior)
    if found is None:
        return None
    names, corr, source = found
    return Table("Correlation matrix", ["parameter", *names], [[n, *corr[i].tolist()] for i, n in enumerate(names)],
                 formats=[None] + [".4f"] * len(names), sheet_name="correlation",
                 note=f"Correlation coefficients from the {source}.")


def correlation_section(fit: Any, posterior: Any, warnings: list[str]) -> Section:
    """The "Correlations and identifiability" section (table, figure, warnings)."""
    blocks: list = []
    found = _correlation(fit, posterior)
    if found is None:
        blocks.append(Paragraph("Correlation matrix: not available (least-squares fit not run or its "
                                "covariance could not be computed; no posterior)."))
    else:
        from speciakin.report.figures import correlation_figure

        names, corr, source = found
        numbers = [str(i + 1) for i in range(len(names))]
        blocks.append(Paragraph("Parameters by number: " + "; ".join(f"{i + 1} = {n}" for i, n in enumerate(names))
                                + "."))
        if len(names) <= PRINTED_CORRELATION_MAX:
            blocks.append(Table("Correlation matrix", ["#", *numbers],
                                [[numbers[i], *corr[i].tolist()] for i in range(len(names))],
                                formats=[None] + [".2f"] * len(names),
                                note=f"Correlation coefficients from the {source}."))
        else:
            blocks.append(Paragraph(f"The {len(names)} x {len(names)} matrix is in the workbook sheet "
                                    "'correlation' and in the figure below."))
        if len(names) > 1:
            blocks.append(Figure(correlation_figure(corr, names),
                                 f"Parameter correlation matrix ({source}).", width_fraction=0.8))
        strong = [f"{names[i]} and {names[j]} ({corr[i, j]:+.3f})"
                  for i in range(len(names)) for j in range(i + 1, len(names))
                  if abs(corr[i, j]) >= STRONG_CORRELATION]
        blocks.append(Paragraph("Strongly correlated pairs (|r| >= "
                                f"{STRONG_CORRELATION:g}): " + ("; ".join(strong) if strong else "none") + "."))
    if warnings:
        blocks.append(Callout("warning", "Warnings of the fit and the posterior", as_sentences(warnings)))
    else:
        blocks.append(Paragraph("The fit and the posterior raised no warning."))
    return Section("Correlations and identifiability", blocks, anchor="correlations")


def identifiability_warnings(fit: Any, posterior: Any) -> list[str]:
    """Plain-words warnings: the fit's, open profile ends, posterior convergence."""
    out: list[str] = []

    def add(text: str) -> None:
        if text and text not in out:
            out.append(text)

    if fit is not None:
        for w in fit.warnings:
            add(w)
        if fit.profiles:
            for r in fit.rows():
                sides = [s for s, flag in (("below", r["profile_open_below"]),
                                           ("above", r["profile_open_above"])) if flag]
                if sides:
                    add(f"the profile likelihood of {r['name']} is open {' and '.join(sides)}: the data do "
                        "not limit it on that side within its bounds")
        if not fit.fit.success:
            add("the least-squares fit did not converge")
    if posterior is not None:
        for w in list(posterior.warnings) + list(posterior.diagnostics.warnings):
            add(w)
    return out

