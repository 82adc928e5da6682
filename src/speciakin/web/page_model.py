"""Step 2 of the page: the model as a readable summary (molecules, sites, steps) and its parameter table."""

from __future__ import annotations

from dash import Input, Output, html

from speciakin.errors import SpeciakinError
from speciakin.web import page_params

__all__ = ["layout", "register"]


def layout() -> html.Div:
    return html.Div(className="page", children=[
        html.H3("Model"),
        html.Div(id="model-message", className="message"),
        html.Pre(id="model-summary", className="summary"),
        page_params.layout(),
    ])


def register(app, state) -> None:
    @app.callback(Output("model-summary", "children"), Output("model-message", "children"),
                  Input("campaign-choice", "value"), Input("param-version", "data"))
    def summary(name, _saved):
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

    page_params.register(app, state)
