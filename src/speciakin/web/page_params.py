"""The parameter table of the model page: fitted or fixed, start value, bounds, prior; diff; save.

Every edit is checked at once with the model file's rules
(:func:`speciakin.web.params_table.proposed_text`) and the change is shown as
a diff of the model file; nothing is written until "Save" is pressed.  Saving
writes through :func:`speciakin.chemistry.modelfile.overrides.write_overrides`
(comments and layout kept, atomic), only to the ``model.toml`` of the chosen
campaign inside the root, and only when the file on disk is still the one the
table was read from.
"""

from __future__ import annotations

import hashlib

import dash_ag_grid as dag
from dash import Input, Output, State, dcc, html, no_update

from speciakin.chemistry.prior_families import PRIOR_FAMILIES
from speciakin.errors import InputError, Location, SpeciakinError
from speciakin.web.params_table import DEFAULT_PRIOR, diff_lines, edited_overrides, parameter_rows, proposed_text

__all__ = ["layout", "loaded", "register", "HELP"]

HELP = ("Tick 'fitted' to let the fit move a parameter, untick it to fix it at its start value. Bounds and prior "
        "numbers are on the fitted scale named in the column 'bounds and prior on' (a pKa: its shift; a rate constant: log10 k, "
        "or a text with its unit). A prior is a family and its numbers, e.g. 'mean=1.5, sd=1'. Each change is "
        "checked with the model file's rules and shown below as a diff; nothing is written until you save.")
_EDITABLE = {"function": "!params.data.locked"}


def _columns() -> list[dict]:
    families = [DEFAULT_PRIOR, *PRIOR_FAMILIES]
    wrapped = {"wrapText": True, "autoHeight": True,
               "cellStyle": {"lineHeight": "1.4em", "paddingTop": "10px", "paddingBottom": "10px"}}
    # text and list cells open their editor on one click; the 'fitted' column has none of that: its
    # check box toggles on the click itself, and a click beside the box does nothing (with a one-click
    # editor there, a click that missed the box opened a second box and left the value unchanged)
    typed = {"editable": _EDITABLE, "singleClickEdit": True}
    return [
        {"field": "name", "headerName": "parameter", "pinned": "left", "width": 250},
        {"field": "fit", "headerName": "fitted", "cellDataType": "boolean", "editable": _EDITABLE, "width": 80},
        {"field": "start", "headerName": "start value", **typed, "flex": 1, "minWidth": 110},
        {"field": "lower", "headerName": "lower bound", **typed, "width": 100},
        {"field": "upper", "headerName": "upper bound", **typed, "width": 100},
        {"field": "scale", "headerName": "bounds and prior on", "flex": 1, "minWidth": 140, **wrapped},
        {"field": "prior", "headerName": "prior", **typed, "width": 105,
         "cellEditor": "agSelectCellEditor", "cellEditorParams": {"values": families}},
        {"field": "prior_numbers", "headerName": "prior numbers", **typed, "flex": 1,
         "minWidth": 150, **wrapped},
        {"field": "note", "headerName": "note", "flex": 2, "minWidth": 160, **wrapped},
    ]


def layout(filled: tuple | None = None) -> html.Div:
    """The parameter section; ``filled`` (:func:`loaded`) fills it in for a campaign."""
    rows, original, status, diff, disabled = filled or ([], None, None, None, True)
    return html.Div(id="parameter-section", children=[
        html.H3("Parameters"),
        html.P(HELP, className="message"),
        dag.AgGrid(id="param-table", columnDefs=_columns(), rowData=rows, getRowId="params.data.name",
                   defaultColDef={"resizable": True, "sortable": False, "cellDataType": False,
                                  "wrapHeaderText": True, "autoHeaderHeight": True},
                   # rows measured to fit their wrapped text take their place at once (no sliding rows
                   # under the pointer while the table settles)
                   dashGridOptions={"domLayout": "autoHeight", "stopEditingWhenCellsLoseFocus": True,
                                    "animateRows": False},
                   style={"width": "100%"}),
        html.Div(className="row", children=[
            html.Button("Save to the model file", id="param-save", n_clicks=0, disabled=disabled),
            html.Button("Discard changes", id="param-discard", n_clicks=0),
        ]),
        html.Div(status, id="param-status", className="message", role="status"),
        html.Pre(diff, id="param-diff", className="summary diff"),
        dcc.Store(id="param-original", data=original),
        dcc.Store(id="param-version", data={"n": 0, "message": ""}),
    ])


def loaded(state, name, said: str = "") -> tuple:
    """(table rows, the table as read, status, diff, save disabled) for campaign ``name``'s model file;
    ``said`` replaces the status."""
    if not name:
        return [], None, "choose a campaign folder first", [], True
    try:
        path, _, text, rows = _read(state, name)
    except (SpeciakinError, OSError) as exc:
        return [], None, f"error: {exc}", [], True
    status = said or f"{len(rows)} parameters of {name}/model.toml; no change yet"
    return [dict(r) for r in rows], {"campaign": name, "digest": _digest(text), "rows": rows}, status, [], True


def _digest(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _model_path(state, name):
    """The campaign's ``model.toml``, resolved inside the root (a link leading out is refused)."""
    folder = state.folder(name)
    return state.folder(f"{name}/model.toml"), folder


def _read(state, name):
    path, folder = _model_path(state, name)
    if not path.is_file():
        raise InputError("the campaign has no model file", Location(file=f"{name}/model.toml"),
                         expected="a model.toml in the campaign folder")
    text = path.read_text(encoding="utf-8")
    rows = state.cached("param-rows", [path], lambda: parameter_rows(text, "model.toml", folder))
    return path, folder, text, rows


def _diff_view(lines: list[str]) -> list:
    """The diff as text spans (escaped by Dash); added lines green, removed lines red (palette colours)."""
    from speciakin.palette import NEUTRAL, OKABE_ITO

    colours = {"+": OKABE_ITO["bluish green"], "-": OKABE_ITO["vermillion"], "@": NEUTRAL}
    spans = []
    for line in lines:
        head = line.startswith(("+++", "---"))
        kind = "diff-head" if head else {"+": "diff-add", "-": "diff-del", "@": "diff-hunk"}.get(line[:1], "")
        style = {"fontWeight": 600} if head else ({"color": colours[line[0]]} if line[:1] in colours else {})
        spans.append(html.Span(line + "\n", className=kind, style=style))
    return spans


def _proposal(state, name, rows, original):
    """(overrides, new text, old text, folder) of the edited rows; raises InputError for a refused edit."""
    path, folder, text, _ = _read(state, name)
    if original is None or original.get("campaign") != name:
        raise InputError("the table is not loaded", Location(key="parameters"), expected="choose a campaign")
    if _digest(text) != original.get("digest"):
        raise InputError("the model file changed on disk since the table was read", Location(file=f"{name}/model.toml"),
                         expected="press 'Discard changes' to read it again, then edit")
    overrides = edited_overrides(original["rows"], rows or [])
    new = proposed_text(text, overrides, "model.toml", folder) if overrides else text
    return overrides, new, text, path


def register(app, state) -> None:
    @app.callback(Output("param-table", "rowData"), Output("param-original", "data"),
                  Output("param-status", "children"), Output("param-diff", "children"),
                  Output("param-save", "disabled"),
                  Input("campaign-choice", "value"), Input("param-discard", "n_clicks"),
                  Input("param-version", "data"), prevent_initial_call=True)  # the page comes filled in
    def load(name, _discard, version):
        from dash import ctx

        said = version.get("message", "") if ctx.triggered_id == "param-version" and version else ""
        return loaded(state, name, said)

    @app.callback(Output("param-status", "children", allow_duplicate=True), Output("param-diff", "children",
                                                                                   allow_duplicate=True),
                  Output("param-save", "disabled", allow_duplicate=True),
                  Input("param-table", "cellValueChanged"), State("param-table", "rowData"),
                  State("param-original", "data"), State("campaign-choice", "value"), prevent_initial_call=True)
    def preview(_changed, rows, original, name):
        if not name or original is None:
            return no_update, no_update, True
        try:
            overrides, new, old, _ = _proposal(state, name, rows, original)
        except (SpeciakinError, OSError) as exc:
            return html.Span(f"not accepted, nothing is written: {exc}", className="bad"), [], True
        if not overrides:
            return "no change from the model file", [], True
        changed = ", ".join(o.name for o in overrides)
        return (html.Span(f"accepted by the model file's rules; changes {changed}. Check the diff, then save.",
                          className="ok"), _diff_view(diff_lines(old, new)), False)

    @app.callback(Output("param-version", "data"), Output("param-status", "children", allow_duplicate=True),
                  Input("param-save", "n_clicks"), State("param-table", "rowData"), State("param-original", "data"),
                  State("campaign-choice", "value"), State("param-version", "data"), prevent_initial_call=True)
    def save(clicks, rows, original, name, version):
        from speciakin.chemistry.modelfile.overrides import write_overrides

        if not clicks or not name:
            return no_update, no_update
        try:
            overrides, _, _, path = _proposal(state, name, rows, original)
            if not overrides:
                return no_update, "nothing to save: no change from the model file"
            write_overrides(path, overrides)
        except (SpeciakinError, OSError) as exc:
            return no_update, html.Span(f"not saved: {exc}", className="bad")
        message = (f"saved {name}/model.toml ({', '.join(o.name for o in overrides)}); comments kept. "
                   "A fit started now uses the saved file.")
        return {"n": (version or {}).get("n", 0) + 1, "message": message}, no_update
