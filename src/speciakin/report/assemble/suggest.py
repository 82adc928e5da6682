"""Report section "Next-run suggestion", from a ``suggest.json`` in the output folder.

The suggestion ranks candidate runs by the expected shrinkage of the
decision's uncertainty (window-edge credible widths, undecided span of set
points, D-optimal gain); the report only shows what the suggestion computed
(method and sources: docs/suggest.md).

References
----------
Chaloner, K. and Verdinelli, I., "Bayesian experimental design: a review",
Statist. Sci. 1995, 10, 273 (expected gain of a design).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping

from speciakin.report.document import BulletList, Figure, KeyValues, Paragraph, Section, Table

__all__ = ["suggestion_section", "SUGGESTION_TITLE", "TOP_CANDIDATES"]

SUGGESTION_TITLE = "Next-run suggestion"

#: Candidates listed in the report (the full list is in suggest.json).
TOP_CANDIDATES = 5


def _conditions(conditions: Mapping[str, Any]) -> str:
    from speciakin.decision.suggest.result import conditions_text

    return conditions_text(dict(conditions))


def _reduction(expected: Mapping[str, Any], side: str | None) -> float | None:
    if side is None:
        undecided = expected.get("undecided_width_pH")
        return None if not undecided else undecided.get("reduction")
    edges = expected.get("window_edge_credible_width_pH")
    return None if not edges else (edges.get(side) or {}).get("reduction")


def suggestion_section(suggestion: Mapping[str, Any] | None, figure: str | Path | None = None) -> Section | None:
    """The "Next-run suggestion" section, or None when no suggestion was made.

    Parameters
    ----------
    suggestion
        The ``suggest.json`` body (``SuggestResult.to_dict()``).
    figure
        ``figures/suggest_shrinkage.png`` when it exists.
    """
    if suggestion is None:
        return None
    candidates = list(suggestion.get("candidates") or [])
    blocks: list = [Paragraph(str(suggestion.get("message") or "The suggestion gives no summary."))]
    thresholds = suggestion.get("thresholds") or {}
    blocks.append(KeyValues([
        ("Method", suggestion.get("method")),
        ("Candidates scored", len(candidates)),
        ("A run helps much", bool(suggestion.get("helps"))),
        ("'Helps much' threshold [pH]", thresholds.get("min_gain_pH")),
        ("Parameters that move the outcomes", ", ".join(suggestion.get("parameters_that_move_outcomes") or [])
         or "none named"),
    ], number_format=".3g"))
    if candidates:
        rows = []
        for c in candidates[:TOP_CANDIDATES]:
            expected = c.get("expected") or {}
            d_opt = expected.get("d_optimal") or {}
            rows.append([int(c.get("rank", len(rows) + 1)), _conditions(c.get("conditions") or {}),
                         _reduction(expected, "low"), _reduction(expected, "high"), _reduction(expected, None),
                         d_opt.get("gain_nats")])
        blocks.append(Table(
            "Top candidate runs", ["rank", "conditions", "low edge", "high edge", "undecided span",
                                   "D-optimal gain"], rows,
            units=[None, None, "pH", "pH", "pH", "nats"], formats=[None, None, ".2f", ".2f", ".2f", ".2f"],
            note="Expected reduction of the credible width of each window edge and of the undecided span of "
                 "set points if the candidate run is added; D-optimal gain for the parameters that move the "
                 "outcomes. Empty cells: no process decision to score against."))
        reasons = [f"{int(c.get('rank', i + 1))}. {_conditions(c.get('conditions') or {})}: {c.get('reason')}"
                   for i, c in enumerate(candidates[:TOP_CANDIDATES]) if c.get("reason")]
        if reasons:
            blocks.append(Paragraph("Why, in plain words:"))
            blocks.append(BulletList(reasons))
    batch = list(suggestion.get("batch") or [])
    if len(batch) > 1:
        blocks.append(Paragraph("Runs chosen together (greedy batch): " + "; ".join(
            _conditions(b.get("conditions") or {}) for b in batch) + "."))
    for note in suggestion.get("notes") or []:
        blocks.append(Paragraph(str(note)))
    if figure is not None and Path(figure).is_file():
        blocks.append(Figure(Path(figure).read_bytes(), "Expected reduction of the decision's uncertainty "
                             "against the set-point pH of a candidate run (figures/suggest_shrinkage.png)."))
    return Section(SUGGESTION_TITLE, blocks, anchor="suggestion")
