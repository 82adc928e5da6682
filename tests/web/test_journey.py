"""The chemist's journey on the page, in a real headless Chromium, on copies of the INVENTED demo.

Each step saves a screenshot under tests/web/screenshots/.
"""

from __future__ import annotations

import re
import time

import pytest

from .conftest import PLANTED

pytestmark = pytest.mark.filterwarnings("ignore")


def choose(page, dropdown: str, value: str) -> None:
    """Pick ``value`` in the Dash dropdown with id ``dropdown``."""
    page.click(f"#{dropdown}")
    page.click(f".dash-dropdown-option:has(input[value='{value}'])")
    page.wait_for_selector(f"#{dropdown}-value:has-text('{value}')")


def open_campaign(page, url: str, name: str) -> None:
    page.goto(url)
    page.wait_for_selector("#campaign-choice")
    choose(page, "campaign-choice", name)


def test_demo_opens_with_a_clean_check_and_raw_data(server, page, shot):
    url, _ = server
    open_campaign(page, url, "demo")
    page.wait_for_selector("#check-summary:has-text('Ready to fit')")
    summary = page.inner_text("#check-summary")
    assert "0 error(s)" in summary and "6 run(s)" in summary
    page.wait_for_selector("#raw-figure .gtitle:has-text('data as imported')")
    # the demo's probe logs are short enough to be drawn whole; the figure says so
    assert page.locator("#raw-figure .annotation-text:has-text('every reading shown')").count() == 1
    shot(page, "01-demo-check-and-raw-data")
    page.click("text=2 Model")
    page.wait_for_selector("#model-summary:has-text('Molecules')")
    text = page.inner_text("#model-summary")
    assert "Steps" in text and "site" in text
    page.wait_for_selector("#param-table [row-id='pKa[S.N_aryl]']")  # the parameter table (tests/web/test_params.py)
    shot(page, "02-model-summary")


def test_planted_check_error_is_shown_at_its_cell(server, page, shot):
    url, _ = server
    sheet, row, col, value = PLANTED
    open_campaign(page, url, "planted")
    page.wait_for_selector("#check-summary:has-text('error(s)')")
    assert "Nothing can be fitted" in page.inner_text("#check-summary")
    cell = page.locator("#check-table .ag-row", has_text=repr(value)).first
    cell.wait_for()
    assert cell.locator("[col-id='sheet']").inner_text() == sheet
    assert cell.locator("[col-id='row']").inner_text() == str(row)
    assert cell.locator("[col-id='column']").inner_text().startswith(col)
    shot(page, "03-planted-error")


def _wait_job(page, state: str, timeout_s: float) -> str:
    end = time.time() + timeout_s
    while time.time() < end:
        cards = page.locator(".job").all_inner_texts()
        if cards and re.search(rf"\b{state}\b", cards[0]):
            return cards[0]
        time.sleep(0.5)
    raise AssertionError(f"no job reached '{state}' in {timeout_s} s: {page.locator('.job').all_inner_texts()}")


def test_fit_job_runs_to_completion_with_progress_and_the_window_status_is_shown(server, page, shot):
    url, state = server
    open_campaign(page, url, "short")
    page.click("text=3 Jobs")
    page.fill("#job-starts", "1")
    page.click("#job-profiles input")  # profiles off: a short job
    page.fill("#job-draws", "8")
    page.click("#job-start")
    page.wait_for_selector("#job-message:has-text('started job')")
    seen_progress = False
    end = time.time() + 900
    while time.time() < end:
        text = page.locator(".job").first.inner_text()
        if ("stage starts" in text or "stage window" in text) and not seen_progress:
            seen_progress = True
            shot(page, "04-job-running")
        if "done" in text.split("\n")[0] or "failed" in text:
            break
        time.sleep(0.3)
    card = page.locator(".job").first.inner_text()
    shot(page, "05-job-done")
    assert "done" in card.split("\n")[0], card
    assert seen_progress, "the job's progress was never shown"
    job = state.board.jobs("short")[0]
    page.reload()  # the job survives a reload: kept on the server, keyed by id
    page.click("text=3 Jobs")
    page.wait_for_selector(f"#job-{job.id}:has-text('done')")
    page.click("text=4 Results")
    page.wait_for_selector("#window-status:has-text('window status')")
    import json

    saved = json.loads((state.root / "short" / job.folder / "window.json").read_text())
    status = page.inner_text("#window-status")
    assert f"window status: {saved['status']}" in status
    for reason in saved.get("status_reasons", []):
        assert page.locator("#window-reasons li", has_text=reason[:40]).count() >= 1
    page.wait_for_selector("#parameter-table .ag-row")
    fit = json.loads((state.root / "short" / job.folder / "fit.json").read_text())
    names = page.locator("#parameter-table [col-id='name'].ag-cell").all_inner_texts()
    assert names == [p["name"] for p in fit["parameters"]]
    # profiles were switched off for this job: the table says so instead of showing open intervals
    assert set(page.locator("#parameter-table [col-id='profile'].ag-cell").all_inner_texts()) == {"not computed"}
    page.wait_for_selector("#fit-figure .gtitle:has-text('fitted curves over data')")
    page.wait_for_selector("#window-figure .gtitle:has-text('probability of meeting spec')")
    shot(page, "06-results")


def test_a_running_job_can_be_cancelled(server, page, shot):
    url, state = server
    open_campaign(page, url, "short")
    page.click("text=3 Jobs")
    page.fill("#job-starts", "64")  # long enough to be caught running
    page.click("#job-start")
    page.wait_for_selector("#job-message:has-text('started job')")
    job = state.board.jobs("short")[0]
    page.wait_for_selector(f"#job-{job.id}:has-text('stage starts')")  # the fit is running
    shot(page, "07-job-before-cancel")
    page.click(f"#job-{job.id} button:has-text('Cancel')")
    page.wait_for_selector(f"#job-{job.id}:has-text('cancelled')", timeout=600_000)
    shot(page, "08-job-cancelled")
    assert job.state == "cancelled" and "step 'starts' cancelled" in job.message
    assert not (state.root / "short" / job.folder / "fit.json").exists()


def test_a_campaign_is_created_from_the_templates_and_a_workbook_uploaded(server, page, shot, tmp_path):
    from speciakin.demo import demo_dir

    url, state = server
    page.goto(url)
    page.wait_for_selector("#campaign-choice")
    page.click("text=Create a campaign or upload a filled workbook")
    page.fill("#new-name", "fresh-campaign")
    page.click("#new-create")
    page.wait_for_selector("#campaign-message:has-text('created fresh-campaign')")
    page.wait_for_selector("#campaign-choice-value:has-text('fresh-campaign')")
    assert (state.root / "fresh-campaign" / "model.toml").is_file()
    page.wait_for_selector("#check-summary:has-text('Nothing to fit yet')")  # the blank workbook is checked
    shot(page, "10-created")
    page.set_input_files("#upload input[type=file]", str(demo_dir() / "campaign.xlsx"))
    page.wait_for_selector("#campaign-message:has-text('stored campaign.xlsx in fresh-campaign')")
    page.wait_for_selector("#check-summary:has-text('6 run(s)')")
    kept = list((state.root / "fresh-campaign" / "previous-workbooks").iterdir())
    assert len(kept) == 1 and kept[0].name.endswith("-campaign.xlsx")
    shot(page, "11-uploaded")
    # a malformed upload gets the same located error as `check`
    fake = tmp_path / "saved as text.xlsx"
    fake.write_text("run,pH\nR1,4\n")
    page.set_input_files("#upload input[type=file]", str(fake))
    page.wait_for_selector("#campaign-message:has-text('stored saved_as_text.xlsx in fresh-campaign')")
    page.wait_for_selector("#check-table .ag-row:has-text('saved_as_text.xlsx')")
    assert "not a workbook" in page.inner_text("#check-table") or "not an XLSX" in page.inner_text("#check-table")
    shot(page, "12-malformed-upload")
    assert len(list((state.root / "fresh-campaign" / "previous-workbooks").iterdir())) == 2
    # a name that leaves the root is refused before anything is written
    page.fill("#new-name", "../outside")
    page.click("#new-create")
    page.wait_for_selector("#campaign-message:has-text('not a usable folder name')")
    assert not (state.root.parent / "outside").exists()


def test_a_failing_job_says_where_the_input_is_wrong(server, page, shot):
    url, state = server
    sheet, row, col, value = PLANTED
    open_campaign(page, url, "planted")
    page.click("text=3 Jobs")
    page.click("#job-start")
    page.wait_for_selector("#job-message:has-text('started job')")
    job = state.board.jobs("planted")[0]
    page.wait_for_selector(f"#job-{job.id}:has-text('failed')", timeout=300_000)
    text = page.inner_text(f"#job-{job.id}")
    assert f"sheet '{sheet}'" in text and f"row {row}" in text and repr(value) in text
    shot(page, "13-job-failed")
