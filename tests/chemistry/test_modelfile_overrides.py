"""Parameter overrides of the model file: fix, free, start and bounds without editing TOML."""

from __future__ import annotations

import math

import pytest

from speciakin.chemistry.modelfile import load_model
from speciakin.chemistry.modelfile.overrides import (apply_overrides_text, load_model_with_overrides,
                                                     parse_overrides, write_overrides)
from speciakin.data.example import example_source
from speciakin.errors import InputError

MODEL = example_source() / "model.toml"


def _quantity(model, name):
    return next(q for q in model.quantities() if q.name == name)


def test_fix_free_start_bounds_change_the_model_in_memory_only():
    before = MODEL.read_bytes()
    ov = parse_overrides(fix=["log10k[acylation_alkyl]"], free=["pKa[SUB.N_aryl]"],
                         start=["log10k[acylation_aryl]=3 L/(mol*min)"], bounds=["pKa[SUB.N_aryl]=-0.5:0.5"])
    model = load_model_with_overrides(MODEL, ov)
    assert not _quantity(model, "log10k[acylation_alkyl]").fit
    aryl = _quantity(model, "pKa[SUB.N_aryl]")
    assert aryl.fit and (aryl.lower, aryl.upper) == (-0.5, 0.5) and aryl.value == 4.6
    # 3 L/(mol*min) = 3/60 L/(mol*s) = 0.05 L/(mol*s); log10(0.05) = -1.30103 (hand arithmetic)
    assert math.isclose(_quantity(model, "log10k[acylation_aryl]").value, -1.3010299956639813, rel_tol=1e-12)
    assert [o["name"] for o in model.extra["overrides"]] == ["log10k[acylation_alkyl]", "pKa[SUB.N_aryl]",
                                                             "log10k[acylation_aryl]"]
    assert MODEL.read_bytes() == before  # the model file is never changed by a fit's overrides


def test_unknown_name_is_a_located_error_listing_the_known_names():
    with pytest.raises(InputError) as e:
        load_model_with_overrides(MODEL, parse_overrides(fix=["pKa[SUB.N9]"]))
    p = e.value.problems[0]
    assert p.location.file == str(MODEL) and p.location.key == "pKa[SUB.N9]"
    assert "pKa[SUB.N_aryl]" in p.expected and "log10k[acylation_aryl]" in p.expected


@pytest.mark.parametrize("option, text", [("start", "pKa[SUB.N_aryl]"), ("bounds", "pKa[SUB.N_aryl]=1"),
                                          ("bounds", "pKa[SUB.N_aryl]=1:0")])
def test_unreadable_options_name_the_option(option, text):
    with pytest.raises(InputError) as e:
        parse_overrides(**{option: [text]})
    assert e.value.problems[0].location.key == f"--{option}"


def test_write_back_keeps_comments_and_reads_back_the_same(tmp_path):
    target = tmp_path / "model.toml"
    target.write_text(MODEL.read_text())
    ov = parse_overrides(free=["pKa[SUB.N_aryl]"], bounds=["pKa[SUB.N_aryl]=-1:1"],
                         start=["log10k[hydrolysis_hydroxide_REA]=4 L/(mol*s)"])
    write_overrides(target, ov)
    text = target.read_text()
    comments = [line for line in MODEL.read_text().splitlines() if line.startswith("#")]
    assert all(c in text.splitlines() for c in comments)
    written, direct = load_model(target), load_model_with_overrides(MODEL, ov)
    assert [(q.name, q.value, q.fit, q.lower, q.upper) for q in written.quantities()] == \
        [(q.name, q.value, q.fit, q.lower, q.upper) for q in direct.quantities()]
    # 4 L/(mol*s): log10 4 = 0.60206 (hand arithmetic)
    assert math.isclose(_quantity(written, "log10k[hydrolysis_hydroxide_REA]").value, math.log10(4.0))
    assert apply_overrides_text(text, []) == text
