"""Fixed report texts: cautions, assumptions and limitations.

These words appear in every report the project writes.  Sections built here
are ordinary :class:`~speciakin.report.document.Section` objects so any
renderer shows them.
"""

from __future__ import annotations

from typing import Any, Iterable

from speciakin.report.document import BulletList, Callout, Paragraph, Section

__all__ = [
    "CAUTIONS_TITLE",
    "CAUTION_ITEMS",
    "DECISION_AID_TEXT",
    "ASSUMPTIONS_TITLE",
    "ASSUMPTION_ITEMS",
    "INVENTED_DATA_NOTE",
    "cautions_section",
    "assumptions_section",
    "model_assumptions",
]

CAUTIONS_TITLE = "Cautions"

#: Hazards of the chemistry this kind of model describes.
CAUTION_ITEMS: tuple[str, ...] = (
    "Reactive reagents such as acylating agents (carboxylic anhydrides and acid chlorides) are corrosive. They react "
    "with water and with bases, and these reactions release heat.",
    "Adding a strong base (for example sodium hydroxide solution) to an aqueous mixture releases "
    "heat; dosing rate and cooling capacity limit how fast it may be added. Exotherms at plant scale "
    "must be assessed before scale-up.",
    "Some bases release gas when they neutralise acid (carbonates and hydrogen carbonates give "
    "carbon dioxide); allow for foaming and vessel venting.",
)

DECISION_AID_TEXT = (
    "The fitted model and the pH window in this report are a decision aid. They do not replace a "
    "process-safety assessment (for example reaction calorimetry), a validated analytical method, "
    "the site's own procedures, or local codes, regulations and licensed professional practice; defer "
    "to the process-safety assessment wherever it differs."
)

ASSUMPTIONS_TITLE = "Assumptions and limitations"

#: Modelling assumptions every report states (the model-specific ones come
#: from :func:`model_assumptions`).
ASSUMPTION_ITEMS: tuple[str, ...] = (
    "Proton transfers are treated as instantaneous: at every moment each molecule's protonation "
    "states are at equilibrium with the current pH, and only the reactions with the reagent and "
    "with water proceed at a finite rate.",
    "The vessel is treated as ideally mixed. A fast reaction dosed into a stirred vessel can be "
    "limited by mixing at the feed point (a local excess of reagent or base); the kinetic model "
    "does not describe that, so scale-up to a different vessel or feed position needs its own check.",
    "Predictions outside the pH, temperature and dosing range of the lab runs are extrapolations.",
    "The pH window is a probability statement given the model and the data, with edges located to 0.01 "
    "pH; at a probability level of 0.95 a claimed edge can lie slightly beyond the true one. In the "
    "project's calibration study (invented campaigns with known truth) that happened in a few campaigns "
    "in a hundred, by hundredths of a pH unit. Confirmation runs at the chosen set point and near the "
    "window edges before transfer are common practice.",
)

INVENTED_DATA_NOTE = (
    "The compound, runs and numbers of this demonstration are invented for illustration; they "
    "describe no real substance or process."
)


def cautions_section(extra_items: Iterable[str] = ()) -> Section:
    """The "Cautions" section: hazards as a list, then the decision-aid statement.

    Parameters
    ----------
    extra_items
        Further cautions specific to one process (appended to the fixed list).
    """
    items = list(CAUTION_ITEMS) + [str(t) for t in extra_items]
    return Section(CAUTIONS_TITLE, [
        BulletList(items),
        Callout("caution", "A decision aid, not a safety assessment", DECISION_AID_TEXT),
    ], anchor="cautions")


def model_assumptions(model: Any = None) -> list[str]:
    """Assumptions that depend on the model actually used: activity setting, ion product of water,
    medium.  Without a model nothing is claimed about them."""
    if model is None:
        return ["The activity and medium settings of the model are not known to this report."]
    from speciakin.chemistry.model import ACTIVITY_MODELS

    activity = getattr(model, "activity", "ideal")
    out = []
    if activity == "ideal":
        out.append("Activities: ideal (activity coefficients equal to 1): concentrations stand for activities, "
                   "so ionic-strength effects on the pKa values and rates are not modelled; they are absorbed "
                   "into the fitted values, which hold for the ionic strength of the lab runs.")
    else:
        out.append(f"Activities: {activity} ({ACTIVITY_MODELS.get(activity, 'as named in the model file')}).")
    pkw = getattr(model, "pkw", None)
    medium = getattr(model, "medium", "") or ""
    if pkw is None:
        out.append("The ion product of water follows pure water (IAPWS R11-07) at the run temperature.")
    else:
        out.append(f"The ion product of the medium{' (' + medium + ')' if medium else ''} is pKw "
                   f"{pkw.value:.2f} at the reference temperature ({'fitted' if pkw.fit else 'fixed'}), "
                   "with the temperature dependence of water.")
    if medium or pkw is not None:
        out.append("In a water/co-solvent medium the electrode pH is an apparent pH; the pKa values fitted "
                   "here hold for that medium only.")
    return out


def assumptions_section(unconstrained: Iterable[str] = (), model: Any = None) -> Section:
    """The "Assumptions and limitations" section.

    Parameters
    ----------
    unconstrained
        Warnings from the fit, one sentence each: parameters the data do not
        pin down (flat or open profile, at a bound), strong correlations.
        Listed under their own heading; an empty list is said in words.
    model
        The model used (:class:`speciakin.chemistry.model.Model`): its
        activity and medium settings give their own items.
    """
    warnings = [str(t) for t in unconstrained]
    blocks = [BulletList(list(ASSUMPTION_ITEMS[:2]) + model_assumptions(model) + list(ASSUMPTION_ITEMS[2:])),
              Paragraph("What the data do not constrain:")]
    if warnings:
        blocks.append(BulletList(warnings))
    else:
        blocks.append(Paragraph("The fit raised no warning about parameters the data leave undetermined."))
    return Section(ASSUMPTIONS_TITLE, blocks, anchor="assumptions")
