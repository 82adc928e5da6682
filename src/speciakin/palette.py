"""The one palette of every figure: colour-blind-safe colours and a stable species -> colour mapping.

The eight colours are the "Color Universal Design" set of Okabe and Ito,
distinguishable by readers with the common forms of colour-vision deficiency
and still apart when printed in grey (with the line styles added below).

References
----------
.. [1] Okabe, M. and Ito, K., "Color Universal Design (CUD): How to make
   figures and presentations that are friendly to colorblind people", 2008,
   https://jfly.uni-koeln.de/color/ (RGB values from its Fig. 16).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Iterable, Mapping

from speciakin.errors import InputError, Location

__all__ = [
    "OKABE_ITO",
    "SPECIES_COLOR_ORDER",
    "LINE_STYLES",
    "MARKERS",
    "NEUTRAL",
    "Style",
    "SpeciesColors",
    "hex_to_rgb",
    "cycle_style",
    "display_names",
    "model_species_colors",
]

#: The eight colours of [1]_ by name, as hex RGB.
OKABE_ITO: Mapping[str, str] = MappingProxyType({
    "black": "#000000",
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "bluish green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish purple": "#CC79A7",
})

#: Order in which species receive colours: strong colours first, yellow (weak
#: on white paper) late; black is kept for data-independent lines (levels,
#: thresholds) and comes last.
SPECIES_COLOR_ORDER: tuple[str, ...] = (
    "blue", "vermillion", "bluish green", "reddish purple", "orange", "sky blue", "yellow", "black",
)

#: Line styles used in turn once every colour has been given out.
LINE_STYLES: tuple[str, ...] = ("-", "--", "-.", ":")

#: Marker shapes for data points, in the same turn as the line styles.
MARKERS: tuple[str, ...] = ("o", "s", "^", "D")

#: Colour for reference lines (levels, thresholds, zero lines).
NEUTRAL = "#4D4D4D"


def hex_to_rgb(color: str) -> tuple[int, int, int]:
    """``"#E69F00"`` -> ``(230, 159, 0)``."""
    text = color.lstrip("#")
    if len(text) != 6:
        raise InputError("not a hex colour", Location(key="color"), color, "'#RRGGBB'")
    try:
        return int(text[0:2], 16), int(text[2:4], 16), int(text[4:6], 16)
    except ValueError:
        raise InputError("not a hex colour", Location(key="color"), color, "'#RRGGBB'") from None


def model_species_colors(model) -> SpeciesColors:
    """One :class:`SpeciesColors` for every figure of a model: the molecules in
    model order, keyed by their display names (:func:`display_names`), the
    short names as aliases, so a species has the same colour whichever name
    a figure uses."""
    names = display_names(model)
    return SpeciesColors([names[m.name] for m in model.molecules], aliases=dict(names))


def display_names(model) -> dict[str, str]:
    """Short name -> compound label of each molecule (the short name when the
    label is empty or shared by another molecule)."""
    labels = [(m.name, (getattr(m, "label", "") or "").strip() or m.name) for m in model.molecules]
    seen = [lab for _, lab in labels]
    return {name: (lab if seen.count(lab) == 1 else name) for name, lab in labels}


def cycle_style(index: int) -> tuple[str, str]:
    """(hex colour, line style) of curve ``index``: the colours in :data:`SPECIES_COLOR_ORDER`,
    then the same colours with the next line style."""
    n = len(SPECIES_COLOR_ORDER)
    return OKABE_ITO[SPECIES_COLOR_ORDER[index % n]], LINE_STYLES[(index // n) % len(LINE_STYLES)]


@dataclass(frozen=True)
class Style:
    """How one species is drawn: colour, line style and data marker."""

    color: str
    line_style: str
    marker: str


@dataclass
class SpeciesColors:
    """Stable species -> :class:`Style` mapping for every figure of a report.

    Build it once from the ordered list of model molecules; the i-th species
    gets the i-th colour of :data:`SPECIES_COLOR_ORDER`; after eight species
    the colours repeat with the next line style and marker.  A species not
    in the list is appended on first use, so it keeps its style afterwards.

    Examples
    --------
    >>> colors = SpeciesColors(["S", "P1", "P2"])
    >>> colors.color("P1") == colors.color("P1")
    True
    >>> SpeciesColors(["substrate"], aliases={"S": "substrate"}).color("S") == OKABE_ITO["blue"]
    True
    """

    species: list[str] = field(default_factory=list)
    #: Other names of a species (e.g. model short name -> compound label): an
    #: alias gets the style of the species it names.
    aliases: dict[str, str] = field(default_factory=dict)

    def __post_init__(self) -> None:
        names: list[str] = []
        for i, name in enumerate(self.species):
            if not isinstance(name, str) or not name:
                raise InputError("species name must be non-empty text", Location(key=f"species[{i}]"),
                                 name, "a molecule name")
            if name not in names:
                names.append(name)
        self.species = names

    def _index(self, name: str) -> int:
        name = self.aliases.get(name, name)
        if name not in self.species:
            self.species.append(name)
        return self.species.index(name)

    def style(self, name: str) -> Style:
        """The :class:`Style` of species ``name``."""
        i = self._index(name)
        color, line = cycle_style(i)
        return Style(color, line, MARKERS[(i // len(SPECIES_COLOR_ORDER)) % len(MARKERS)])

    def color(self, name: str) -> str:
        """Hex colour of species ``name``."""
        return self.style(name).color

    def line_style(self, name: str) -> str:
        """Matplotlib line style of species ``name``."""
        return self.style(name).line_style

    def mapping(self, names: Iterable[str] | None = None) -> dict[str, Style]:
        """Styles of ``names`` (default: every known species)."""
        return {n: self.style(n) for n in (list(names) if names is not None else list(self.species))}

    def to_dict(self) -> dict[str, dict[str, str]]:
        return {n: {"color": s.color, "line_style": s.line_style, "marker": s.marker}
                for n, s in self.mapping().items()}
