"""A readable scheme of a model: species, sites, steps, runs, fitted quantities."""

from __future__ import annotations

from speciakin.chemistry.model import PSEUDO_REACTANTS, SITE_KINDS, Model, Quantity, Reactant, Run, Step

__all__ = ["model_summary", "state_word"]

#: Words for a site state in the scheme, by site kind and state.
_STATE_WORDS = {
    ("base", "deprotonated"): "free",
    ("base", "protonated"): "protonated",
    ("acid", "deprotonated"): "anion",
    ("acid", "protonated"): "neutral",
}


def state_word(kind: str, state: str) -> str:
    """``state_word("base", "deprotonated")`` -> ``"free"``."""
    return _STATE_WORDS.get((kind, state), state)


def _fit_note(q: Quantity) -> str:
    if not q.fit:
        return ""
    bounds = ""
    if q.lower is not None or q.upper is not None:
        lo = "-inf" if q.lower is None else f"{q.lower:g}"
        hi = "inf" if q.upper is None else f"{q.upper:g}"
        bounds = f" {'shift ' if q.shift else ''}in [{lo}, {hi}]"
    prior = ""
    if q.prior is not None:
        params = ", ".join(f"{k}={v:g}" for k, v in q.prior.parameters.items())
        prior = f", prior {q.prior.family}({params})"
    return f" (fitted{bounds}{prior})"


def _reactant(model: Model, r: Reactant) -> str:
    text = r.species if r.coefficient == 1.0 else f"{r.coefficient:g} {r.species}"
    if r.species in PSEUDO_REACTANTS:
        return "H2O" if r.species == "water" else "OH-"
    if r.requires:
        try:
            molecule = model.molecule(r.species)
            kinds = {s.name: s.kind for s in molecule.sites}
        except KeyError:
            kinds = {}
        text += "[" + ", ".join(f"{q.site} {state_word(kinds.get(q.site, ''), q.state)}"
                                for q in r.requires) + "]"
    return text


def _step(model: Model, s: Step) -> str:
    left = " + ".join(_reactant(model, r) for r in s.reactants)
    right = " + ".join(n if c == 1.0 else f"{c:g} {n}" for n, c in s.products) or "(nothing tracked)"
    unit = s.log10_k.unit[6:-1] if s.log10_k.unit.startswith("log10(") else s.log10_k.unit
    k = f"k = {10 ** s.log10_k.value:.4g} {unit} (log10 k = {s.log10_k.value:.3f}){_fit_note(s.log10_k)}"
    ea = s.activation_energy
    if ea.value or ea.fit:
        k += f", Ea = {ea.value:g} kJ/mol{_fit_note(ea)}"
    return f"  {s.name}: {left} -> {right}   {k}"


def _run(r: Run) -> str:
    ph = r.ph
    if ph.mode == "held":
        conc = "?" if ph.titrant_concentration is None else f"{ph.titrant_concentration:g} mol/L"
        how = f"pH held at {ph.setpoint} with {ph.titrant} ({conc})"
    elif ph.mode == "logged":
        how = f"pH logged ({len(ph.log_times)} points)"
    else:
        how = "pH free"
    temps = r.temperature.temperatures
    temp = f"{temps[0] - 273.15:.1f} C" if len(temps) == 1 else \
        f"{min(temps) - 273.15:.1f}-{max(temps) - 273.15:.1f} C profile"
    return (f"  {r.name}: {how}; {temp}; {r.volume * 1e3:g} mL; {r.end_time / 60:g} min; "
            f"{len(r.doses)} dose(s); {len(r.withdrawals)} sample(s)")


def model_summary(model: Model) -> str:
    """Readable scheme of ``model``.

    Returns
    -------
    str
        Sections with stable headings: ``Model``, ``Ions``, ``Molecules``,
        ``Steps``, ``Runs``, ``Fitted quantities``.
    """
    lines = [f"Model: {model.name}" + (f" - {model.description}" if model.description else ""),
             f"  reference temperature {model.reference_temperature - 273.15:.2f} C; "
             f"activity correction {model.activity}", "", "Ions"]
    lines += [f"  {i.name} ({i.charge:+d})" for i in model.ions] or ["  (none)"]
    lines += ["", "Molecules"]
    for m in model.molecules:
        tags = [t for t in (m.role, m.label if m.label != m.name else "",
                            f"{m.molar_mass:g} g/mol" if m.molar_mass else "",
                            f"fixed charge {m.fixed_charge:+d}" if m.fixed_charge else "") if t]
        moieties = " ".join(f"{k}={v:g}" for k, v in m.moieties.items())
        lines.append(f"  {m.name}" + (f" ({'; '.join(tags)})" if tags else "")
                     + (f" moieties {moieties}" if moieties else ""))
        for s in m.sites:
            kind = s.kind if s.kind in SITE_KINDS else f"{s.kind}?"
            dh = f", dH {s.enthalpy.value:g} kJ/mol{_fit_note(s.enthalpy)}" \
                if s.enthalpy.value or s.enthalpy.fit else ""
            lines.append(f"    site {s.name}: {kind}, pKa {s.pka.value:.2f}{_fit_note(s.pka)}{dh}")
        for i in m.interactions:
            lines.append(f"    W({i.site_a}~{i.site_b}) = {i.w.value:.2f}{_fit_note(i.w)}")
    lines += ["", "Steps"]
    lines += [_step(model, s) for s in model.steps] or ["  (none)"]
    lines += ["", "Runs"]
    lines += [_run(r) for r in model.runs] or ["  (none)"]
    fitted = [q.name for q in model.quantities() if q.fit]
    lines += ["", f"Fitted quantities ({len(fitted)})"]
    lines += [f"  {name}" for name in fitted] or ["  (none: every quantity is fixed)"]
    return "\n".join(lines) + "\n"
