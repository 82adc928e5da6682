"""The parameter table of the model page, in a real headless Chromium, on a copy of the INVENTED demo.

Fix and free parameters, change a start value, bounds and a prior in the
table, read the diff, save, and find the model file on disk changed with its
comments kept; an invalid bound is refused with a message naming the
parameter and nothing is written; a fit job started afterwards uses the
saved file.  Screenshots go to tests/web/screenshots/.
"""

from __future__ import annotations

import hashlib
import json
import time

import pytest

from .test_journey import open_campaign

pytestmark = pytest.mark.filterwarnings("ignore")

CAMPAIGN = "params-short"


@pytest.fixture(scope="module")
def campaign(root):
    """A copy of the reduced demo (three runs) whose model file the tests edit."""
    from pipeline.regression_case import build_reduced_demo

    return build_reduced_demo(root / CAMPAIGN)


def cell(page, row: str, column: str):
    return page.locator(f"#param-table [row-id='{row}'] [col-id='{column}']")


def edit(page, row: str, column: str, value: str) -> None:
    """Type ``value`` into a text cell of the parameter table (single click opens the editor)."""
    target = cell(page, row, column)
    target.click()
    box = target.locator("input")
    box.fill(value)
    box.press("Enter")
    page.wait_for_function(
        "([r, c, v]) => { const e = document.querySelector(`#param-table [row-id='${r}'] [col-id='${c}']`);"
        " return e && !e.querySelector('input') && e.innerText.trim() === v; }", arg=[row, column, value])


def pick(page, row: str, column: str, value: str) -> None:
    """Choose ``value`` in a list cell of the parameter table (the grid's select editor)."""
    target = cell(page, row, column)
    target.click()
    target.locator(".ag-picker-field-wrapper").click()
    page.locator(".ag-select-list [role=option]").get_by_text(value, exact=True).click()
    if target.locator(".ag-picker-field-wrapper").count():
        page.keyboard.press("Enter")
    page.wait_for_function(
        "([r, c, v]) => { const e = document.querySelector(`#param-table [row-id='${r}'] [col-id='${c}']`);"
        " return e && !e.querySelector('.ag-picker-field-wrapper') && e.innerText.trim() === v; }",
        arg=[row, column, value])


def toggle(page, row: str) -> None:
    """Click the 'fitted' box of ``row`` and wait until the table holds the flipped value."""
    box = cell(page, row, "fit").locator("input[type=checkbox]")
    was = box.is_checked()
    box.click()
    page.wait_for_function(
        "([r, v]) => dash_ag_grid.getApi('param-table').getRowNode(r).data.fit === v", arg=[row, not was],
        timeout=5000)


def settled(page, row: str, still: float = 0.6, timeout: float = 20.0) -> None:
    """Wait until ``row`` of the table keeps its place for ``still`` seconds.

    Rows grow to fit their wrapped text once the tab is shown; a click aimed
    at a box before that lands where the box was.
    """
    where, since, end = None, time.monotonic(), time.monotonic() + timeout
    while time.monotonic() < end:
        now = cell(page, row, "fit").bounding_box()
        if now != where:
            where, since = now, time.monotonic()
        elif time.monotonic() - since >= still:
            return
        time.sleep(0.1)
    raise AssertionError(f"the row {row} of the parameter table still moves after {timeout} s")


def status_after(page, text: str) -> str:
    page.wait_for_selector(f"#param-status:has-text('{text}')")
    return page.inner_text("#param-status")


def open_table(page, url) -> None:
    open_campaign(page, url, CAMPAIGN)
    page.click("text=2 Model")
    page.wait_for_selector("#param-table [row-id='pKa[S.N_alkyl]']")
    settled(page, "pKa[ACD.COOH]")


def test_table_lists_every_parameter_as_the_file_writes_it(server, page, campaign, shot):
    from speciakin.chemistry.modelfile import load_model

    url, _ = server
    open_table(page, url)
    names = page.locator("#param-table .ag-pinned-left-cols-container [col-id='name'].ag-cell").all_inner_texts()
    model = load_model(campaign / "model.toml")
    assert names == [q.name for q in model.quantities() if q.name]
    # as written in the file: a rate constant's start with its unit, a pKa's bounds of the shift
    assert cell(page, "log10k[acylation_aryl]", "start").inner_text() == "1 L/(mol*s)"
    assert cell(page, "pKa[S.N_aryl]", "lower").inner_text() == "-1.5"
    assert cell(page, "pKa[S.N_aryl]", "fit").locator("input").is_checked()
    assert not cell(page, "pKa[S.OH]", "fit").locator("input").is_checked()
    assert "interaction energy" in cell(page, "W[S.N_alkyl~N_aryl]", "note").inner_text()
    shot(page, "20-parameter-table")


def test_a_click_beside_the_fitted_box_changes_nothing_and_the_box_itself_toggles(server, page, campaign):
    """The 'fitted' cell has no editor of its own: only its check box changes the value."""
    url, _ = server
    open_table(page, url)
    row = "pKa[ACD.COOH]"
    target = cell(page, row, "fit")
    target.scroll_into_view_if_needed()
    settled(page, row)
    editing = "() => dash_ag_grid.getApi('param-table').getEditingCells().map(c => c.column.getColId())"
    fitted = f"() => dash_ag_grid.getApi('param-table').getRowNode('{row}').data.fit"
    before = page.evaluate(fitted)
    edge = target.bounding_box()
    page.mouse.click(edge["x"] + edge["width"] - 4, edge["y"] + edge["height"] / 2)  # inside the cell, off the box
    time.sleep(0.3)
    assert page.evaluate(editing) == [] and page.evaluate(fitted) is before
    toggle(page, row)
    assert page.evaluate(fitted) is (not before) and page.evaluate(editing) == []
    assert target.locator("input").is_checked() is (not before)
    page.click("#param-discard")
    page.wait_for_function(f"() => dash_ag_grid.getApi('param-table').getRowNode('{row}').data.fit === {str(before).lower()}")


def test_edit_diff_and_save_keep_the_comments(server, page, campaign, shot):
    from speciakin.chemistry.modelfile import load_model

    url, _ = server
    path = campaign / "model.toml"
    before = path.read_text()
    open_table(page, url)
    toggle(page, "pKa[S.N_alkyl]")                      # fix
    status_after(page, "changes pKa[S.N_alkyl]")
    toggle(page, "pKa[ACD.COOH]")                       # free
    edit(page, "pKa[ACD.COOH]", "lower", "-0.5")
    edit(page, "pKa[ACD.COOH]", "upper", "0.5")
    edit(page, "log10k[acylation_alkyl]", "start", "20 L/(mol*s)")
    edit(page, "log10k[acylation_alkyl]", "prior_numbers", "mean=1.5, sd=1")
    pick(page, "log10k[acylation_alkyl]", "prior", "normal")
    page.wait_for_selector("#param-diff:has-text('family = \"normal\"')")
    text = status_after(page, "log10k[acylation_alkyl]")
    assert "accepted by the model file's rules" in text and "pKa[ACD.COOH]" in text, text
    diff = page.inner_text("#param-diff")
    assert "-pka = { value = 9.6, fit = true, lower = -1.5, upper = 1.0, spread = 0.5 }" in diff
    assert "+pka = { value = 9.6, fit = false, lower = -1.5, upper = 1.0, spread = 0.5 }" in diff
    assert '+k = { value = "20 L/(mol*s)", fit = true' in diff and 'family = "normal"' in diff
    assert path.read_text() == before, "nothing is written before saving"
    shot(page, "21-parameter-diff")
    page.click("#param-save")
    status_after(page, "saved params-short/model.toml")
    after = path.read_text()
    assert after != before
    # every comment line of the file is still there, in order
    comments = [line for line in before.splitlines() if line.lstrip().startswith("#")]
    assert [line for line in after.splitlines() if line.lstrip().startswith("#")] == comments
    model = {q.name: q for q in load_model(path).quantities()}
    assert model["pKa[S.N_alkyl]"].fit is False
    assert model["pKa[ACD.COOH]"].fit is True
    assert (model["pKa[ACD.COOH]"].lower, model["pKa[ACD.COOH]"].upper) == (-0.5, 0.5)
    # internal units are mol, L, s (docs/model-file.md): 20 L/(mol*s) -> log10(20) = 1.30103 (log table)
    assert model["log10k[acylation_alkyl]"].value == pytest.approx(1.3010299956639813, abs=1e-12)
    prior = model["log10k[acylation_alkyl]"].prior
    assert (prior.family, prior.parameters) == ("normal", {"mean": 1.5, "sd": 1.0})
    # the table is read again from the saved file: nothing left to save
    page.wait_for_selector("#param-save[disabled]")
    assert not cell(page, "pKa[S.N_alkyl]", "fit").locator("input").is_checked()
    shot(page, "22-parameter-saved")


def test_an_invalid_bound_is_refused_with_a_message_and_nothing_is_written(server, page, campaign, shot):
    url, _ = server
    path = campaign / "model.toml"
    digest = hashlib.sha256(path.read_bytes()).hexdigest()
    open_table(page, url)
    edit(page, "pKa[S.N_aryl]", "lower", "2")            # above the upper bound 1.0
    text = status_after(page, "not accepted")
    assert "pKa[S.N_aryl]" in text and "lower bound is not below the upper bound" in text, text
    assert "expected lower < upper" in text, text
    assert page.locator("#param-save").is_disabled()
    shot(page, "23-parameter-refused")
    edit(page, "pKa[S.N_aryl]", "lower", "abc")          # not a number at all
    text = status_after(page, "wrong type")
    assert "pKa[S.N_aryl]" in text and "expected a number" in text, text
    page.click("#param-discard")
    page.wait_for_function("() => document.querySelector(\"#param-table [row-id='pKa[S.N_aryl]'] "
                           "[col-id='lower']\").innerText.trim() === '-1.5'")
    assert hashlib.sha256(path.read_bytes()).hexdigest() == digest


def test_a_fit_job_started_after_saving_uses_the_saved_file(server, page, campaign, shot):
    url, state = server
    open_table(page, url)
    if cell(page, "pKa[S.N_alkyl]", "fit").locator("input").is_checked():  # run alone: fix it here
        toggle(page, "pKa[S.N_alkyl]")
        status_after(page, "changes pKa[S.N_alkyl]")
        page.click("#param-save")
        status_after(page, "saved")
    page.click("text=3 Jobs")
    page.fill("#job-starts", "1")
    page.click("#job-profiles input")
    page.fill("#job-draws", "8")
    page.click("#job-start")
    page.wait_for_selector("#job-message:has-text('started job')")
    job = state.board.jobs(CAMPAIGN)[0]
    end = time.time() + 900
    while time.time() < end and job.state in ("queued", "running"):
        time.sleep(0.5)
    assert job.state == "done", job.message
    fit = json.loads((campaign / job.folder / "fit.json").read_text())
    names = [p["name"] for p in fit["parameters"]]
    assert "pKa[S.N_alkyl]" not in names and "pKa[S.N_aryl]" in names
    shot(page, "24-fit-after-save")
