"""Step 2 of the page: the model as a readable summary (molecules, sites, steps)."""

from __future__ import annotations

from dash import Input, Output, html

from speciakin.errors import SpeciakinError

__all__ = ["layout", "register", "NOT_YET"]

#: Honest placeholder for the parameter table (fix/free, start values, bounds, priors).
NOT_YET = ("Parameter table: not yet available. Choosing which parameters are fitted, their start values, "
           "bounds and priors on this page (written back to the model file with its comments kept) comes in a "
           "later version; until then edit model.toml and reload this page.")


def layout() -> html.Div:
    return html.Div(className="page", children=[
        html.H3("Model"),
        html.Div(id="model-message", className="message"),
        html.Pre(id="model-summary", className="summary"),
        html.H3("Parameters"),
        html.P(NOT_YET, id="parameter-placeholder", className="placeholder"),
    ])


def register(app, state) -> None:
    @app.callback(Output("model-summary", "children"), Output("model-message", "children"),
                  Input("campaign-choice", "value"))
    def summary(name):
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
