"""Every callback's ids and properties exist in the page (no browser).

Dash's renderer checks this before its first drawing, against the page with every tab's page in it
(``app.validation_layout``), but in the page as served it only writes a console error that no test reads
(docs/web.md).  So a component renamed in a layout, or an id or property mistyped in a callback, fails
here.  What counts as the page: the page a visit gets, every tab's page as first put in (its ``layout()``)
and a running job's card (the only components with pattern-matching ids, made by a callback).
"""

from __future__ import annotations

import json
import shutil

import pytest
from dash._utils import split_callback_id
from dash._layout_utils import traverse

from speciakin.web import create_app, page_jobs
from speciakin.web.app import _TABS

#: A running job, as the board's view of it, for its card (its cancel button).
_RUNNING = {"id": "j1", "label": "fit and window", "folder": "", "state": "running", "stage": "fit",
            "done": 1, "total": 3, "seconds_left": 5.0, "elapsed": 2.0, "message": "", "campaign": "demo"}


@pytest.fixture
def app(tmp_path):
    """The app for a root holding the demo (a new one per test: a test may add callbacks to it)."""
    from speciakin.demo import demo_dir

    shutil.copytree(demo_dir(), tmp_path / "demo", ignore=shutil.ignore_patterns("results"))
    return create_app(tmp_path)[0]


def every_page(app) -> dict:
    """The page's components by id (pattern-matching ids as sorted JSON): the page a visit gets, every
    tab's page as first put in and a running job's card."""
    found = {}
    for part in (app.layout(), *[module.layout() for _, _, module in _TABS], page_jobs.job_card(_RUNNING)):
        for component, _ in traverse(part):
            key = getattr(component, "id", None)
            if key is not None:
                found[json.dumps(key, sort_keys=True) if isinstance(key, dict) else key] = component
    return found


def dependencies(app) -> list[tuple[str, str, str, bool]]:
    """(kind, id, property, optional) of every Output, Input and State of every callback; a
    pattern-matching id as its JSON (wildcards as ``["ALL"]``)."""
    out = []
    for callback in app._callback_list:
        outputs = split_callback_id(callback["output"])
        for dep in outputs if isinstance(outputs, list) else [outputs]:
            out.append(("Output", dep["id"], dep["property"].split("@")[0], False))
        for kind, deps in (("Input", callback["inputs"]), ("State", callback["state"])):
            out += [(kind, dep["id"], dep["property"], bool(dep.get("allow_optional"))) for dep in deps]
    return out


def _matches(pattern: dict, key: str) -> bool:
    """A component's JSON id matches a pattern-matching id (its wildcards match any value)."""
    if not key.startswith("{"):
        return False
    found = json.loads(key)
    return found.keys() == pattern.keys() and all(
        isinstance(want, list) or found[name] == want for name, want in pattern.items())


def problems(app) -> list[str]:
    """What is wrong: a callback's id not in the page, or a property its component does not have."""
    page = every_page(app)
    out = []
    for kind, key, prop, optional in dependencies(app):
        if key.startswith("{"):
            pattern = json.loads(key)
            targets = [component for name, component in page.items() if _matches(pattern, name)]
        else:
            targets = [page[key]] if key in page else []
        if not targets:
            if not optional:
                out.append(f"{kind} {key}.{prop}: no component with that id")
            continue
        for component in targets:
            wild = getattr(component, "_valid_wildcard_attributes", [])
            if prop not in component._prop_names and not any(prop.startswith(w) for w in wild):
                out.append(f"{kind} {key}.{prop}: {type(component).__name__} has no property {prop!r}")
    return out


def test_callbacks_know_every_id_they_use(app):
    deps = dependencies(app)
    # all of the app's callbacks are seen (22 at the time of writing, with outputs, inputs and states)
    assert len(app._callback_list) >= 20 and {kind for kind, *_ in deps} == {"Output", "Input", "State"}
    assert any(key.startswith("{") for _, key, _, _ in deps)  # the pattern-matching cancel buttons are checked
    assert problems(app) == []


def test_a_wrong_id_or_property_is_found(app):
    """The check itself: a callback on a missing id, or on a property its component lacks, is reported."""
    from dash import Input, Output

    app.callback(Output("no-such-id", "children"), Input("tabs", "no_such_property"))(lambda v: v)
    app.callback(Output("campaign-message", "children", allow_duplicate=True),
                 Input({"type": "job-cancel", "id": "j2"}, "n_clicks"), prevent_initial_call=True)(lambda v: v)
    found = problems(app)
    assert "Output no-such-id.children: no component with that id" in found
    assert "Input tabs.no_such_property: Tabs has no property 'no_such_property'" in found
    assert len(found) == 3 and found[-1].startswith('Input {"id":"j2"')  # the pattern's fixed value differs
