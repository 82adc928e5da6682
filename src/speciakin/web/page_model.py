"""Step 2 of the page: the model as a readable summary (molecules, sites, steps) and its parameter table."""

from __future__ import annotations

from dash import Input, Output, html

from speciakin.errors import SpeciakinError
from speciakin.web import page_params

__all__ = ["layout", "mounted", "register"]


def layout(filled: tuple | None = None) -> html.Div:
    """The tab's page; ``filled`` (:func:`mounted`) fills it in for a campaign."""
    (summary, message), params = filled or (("", None), None)
    return html.Div(className="page", children=[
        html.H3("Model"),
        html.Div(message, id="model-message", className="message"),
        html.Pre(summary, id="model-summary", className="summary"),
        page_params.layout(params),
    ])


def mounted(state, name) -> html.Div:
    """The tab's page as it is put into the page on first opening, filled in for campaign ``name``
    (one round trip instead of two more)."""
    return layout((_summary(state, name), page_params.loaded(state, name)))


def _summary(state, name) -> tuple[str, str]:
    """(model summary, message) of campaign ``name``'s model file."""
    if not name:
        return "", "choose a campaign folder first"
    from speciakin.chemistry.modelfile import load_model
    from speciakin.chemistry.modelfile.summary import model_summary

    try:
        path = state.folder(name) / "model.toml"
        text = state.cached("model", [path], lambda: model_summary(load_model(path)))
    except SpeciakinError as exc:
        return "", f"error: {exc}"
    text = text.replace("\nRuns\n  (none)\n", "\nRuns\n  (from the workbook: see step 1)\n")
    return text, f"model file: {name}/model.toml"


def register(app, state) -> None:
    @app.callback(Output("model-summary", "children"), Output("model-message", "children"),
                  Input("campaign-choice", "value"), Input("param-version", "data"), prevent_initial_call=True)
    def summary(name, _saved):
        return _summary(state, name)  # not when the page is put in: it comes filled in

    page_params.register(app, state)
