"""Fixed report texts: cautions and assumptions (words from the project's domain notes)."""

from __future__ import annotations

from speciakin.report import assumptions_section, cautions_section
from speciakin.report.texts import ASSUMPTION_ITEMS, CAUTION_ITEMS


def _all_text(section) -> str:
    parts = []
    for block in section.blocks:
        parts += getattr(block, "items", []) + [getattr(block, "text", "")]
    return " ".join(parts)


def test_cautions_cover_the_hazards_and_the_decision_aid_statement():
    text = _all_text(cautions_section(["Keep the quench vessel below 25 C."]))
    for phrase in ("anhydrides", "acid chlorides", "corrosive", "heat", "strong base", "gas",
                   "reaction calorimetry", "validated analytical method", "procedures", "regulations",
                   "Keep the quench vessel"):
        assert phrase in text, phrase
    assert cautions_section().blocks[1].kind == "caution"


def test_assumptions_list_fit_warnings_or_say_there_are_none():
    with_warnings = _all_text(assumptions_section(["pKa2 is not constrained (open profile)."]))
    assert "pKa2 is not constrained" in with_warnings
    assert "instantaneous" in with_warnings and "mixing" in with_warnings
    assert "no warning" in _all_text(assumptions_section())
    assert len(ASSUMPTION_ITEMS) >= 3 and len(CAUTION_ITEMS) >= 3


def test_assumptions_state_the_activity_and_ion_product_the_model_uses():
    from types import SimpleNamespace

    # a model with the only activity setting a model accepts ("ideal"), water as medium
    ideal = SimpleNamespace(activity="ideal", pkw=None, medium="")
    text = _all_text(assumptions_section(model=ideal))
    assert "Activities: ideal" in text and "IAPWS R11-07" in text
    assert "Davies" not in text and "apparent pH" not in text  # nothing the model does not do
    # a medium with its own pKw: the value, and the apparent-pH remark
    medium = SimpleNamespace(activity="ideal", pkw=SimpleNamespace(value=14.9, fit=False), medium="water/THF 70:30")
    text = _all_text(assumptions_section(model=medium))
    assert "pKw 14.90" in text and "water/THF 70:30" in text and "apparent pH" in text
    assert "IAPWS" not in text
    # without a model nothing is claimed about activities
    assert "not known" in _all_text(assumptions_section())
