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


def show_view(page, view: str) -> None:
    """Choose a view of the results tab (its sub-tab: parameters, correlation, window, map, curves)."""
    page.click(f"#result-view-{view}")
    page.wait_for_selector(f"#result-view-{view}.tab--selected")


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
    # the workbook did not import: no "0 run(s)" for a workbook that holds runs
    assert "runs not counted (the workbook did not import)" in page.inner_text("#check-summary")
    cell = page.locator("#check-table tr.problem", has_text=repr(value)).first
    cell.wait_for()
    assert cell.locator("[data-col='severity']").inner_text() == "error"
    assert cell.locator("[data-col='sheet']").inner_text() == sheet
    assert cell.locator("[data-col='row']").inner_text() == str(row)
    assert cell.locator("[data-col='column']").inner_text().startswith(col)
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
    # profiles off and few window draws keep the job short; 12 starts keep its fit stage running for
    # more than one poll of the job list (1 s), or a fast machine finishes before progress is shown
    page.fill("#job-starts", "12")
    page.click("#job-profiles input")
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
    shot(page, "06-results")
    # each figure is drawn when its view is chosen
    show_view(page, "curves")
    page.wait_for_selector("#fit-figure .gtitle:has-text('fitted curves over data')")
    shot(page, "06b-results-fitted-curves")
    show_view(page, "window")
    page.wait_for_selector("#window-figure .gtitle:has-text('probability of meeting spec')")
    assert page.locator("#fit-figure").count() == 0  # the view not shown is not in the page
    shot(page, "06c-results-window")


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
    # the results index records the cancelled job as interrupted, and the history tab shows it
    page.click("text=5 History")
    run_id = job.folder.rsplit("/", 1)[-1]
    row = page.locator("#history-table .ag-row", has_text=run_id).first
    row.wait_for()
    assert row.locator("[col-id='status']").inner_text() == "interrupted"


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
    page.wait_for_selector("#check-table tr.problem:has-text('saved_as_text.xlsx')")
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


def _complete_fit(state) -> str:
    """The id of a complete fit of the "short" campaign (one is made when none exists yet)."""
    from speciakin.pipeline import results_root
    from speciakin.pipeline.contrast import live_runs

    runs = [r for r in live_runs(results_root(state.root / "short")) if r["status"] == "complete"
            and r["step"] == "fit"]
    if runs:
        return runs[0]["id"]
    job = state.board.submit("fit", "short", state.root / "short", {"starts": 1, "draws": 8})
    while job.state in ("queued", "running"):
        time.sleep(0.2)
    assert job.state == "done", job.message
    return job.folder.rsplit("/", 1)[-1]


def test_report_job_download_and_two_results_side_by_side(server, page, shot, tmp_path):
    import json

    url, state = server
    fit_id = _complete_fit(state)
    open_campaign(page, url, "short")
    page.click("text=3 Jobs")
    page.check("#job-kind input[value='report']")
    page.wait_for_selector("#job-start:has-text('Start report')")
    assert page.locator("#job-field-starts").is_hidden()  # only the settings a report reads are shown
    page.uncheck("#job-formats input[value='pdf']")
    page.uncheck("#job-formats input[value='xlsx']")
    page.click("#job-start")
    page.wait_for_selector("#job-message:has-text('started job')")
    job = state.board.jobs("short")[0]
    assert job.kind == "report"
    page.wait_for_selector(f"#job-{job.id}:has-text('done')", timeout=300_000)
    shot(page, "14-report-job-done")
    link = page.locator(f"#job-{job.id} a.download", has_text="report.html")
    with page.expect_download() as info:
        link.click()
    download = info.value
    assert download.suggested_filename == "report.html"
    saved = tmp_path / "report.html"
    download.save_as(saved)
    assert saved.read_bytes() == (state.root / "short" / job.folder / "report.html").read_bytes()
    assert "<html" in saved.read_text(encoding="utf-8").lower()

    report_id = job.folder.rsplit("/", 1)[-1]
    page.click("text=5 History")
    page.wait_for_selector(f"#history-table .ag-row:has-text('{report_id}')")
    fit_row = page.locator("#history-table .ag-row", has_text=fit_id).first
    window = json.loads((state.root / "short" / "results" / fit_id / "window.json").read_text())
    assert fit_row.locator("[col-id='window_status']").inner_text() == window["status"]
    assert fit_row.locator("[col-id='window']").inner_text().startswith("pH ") or not window["primary_window"]
    assert fit_row.locator("[col-id='status']").inner_text() == "complete"
    assert "speciakin web: report" in page.locator("#history-table .ag-row", has_text=report_id).first.inner_text()
    shot(page, "15-history")
    choose(page, "files-choice", report_id)
    page.wait_for_selector("#files-list a:has-text('report.html')")
    with page.expect_download() as info:
        page.click("#files-list a:has-text('window.json')")
    assert info.value.suggested_filename == "window.json"
    choose(page, "compare-a", fit_id)
    choose(page, "compare-b", report_id)
    page.wait_for_selector("#compare-view table.compare")
    text = page.inner_text("#compare-view")
    fit = json.loads((state.root / "short" / "results" / fit_id / "fit.json").read_text())
    for p in fit["parameters"]:
        assert p["name"] in text
    assert "pH window and its status" in text and window["status"] in text
    assert page.inner_text("#compare-inputs-summary").startswith("inputs: the same")
    page.locator("#compare-view").scroll_into_view_if_needed()
    shot(page, "16-two-results-side-by-side")


def test_a_short_posterior_until_converged_is_started_from_the_page(server, page, shot):
    import json

    url, state = server
    fit_id = _complete_fit(state)
    open_campaign(page, url, "short")
    page.click("text=3 Jobs")
    page.check("#job-kind input[value='posterior']")
    page.wait_for_selector("#job-start:has-text('Start posterior')")
    choose(page, "job-source", fit_id)
    assert page.locator("#job-field-cap").is_hidden()  # fixed steps by default: no cap shown
    page.check("#job-until_converged input[value='until']")
    page.wait_for_selector("#job-field-cap", state="visible")
    assert page.locator("#job-field-steps").is_hidden()
    page.fill("#job-cap", "40")
    page.fill("#job-walkers", "16")  # 2 x the 8 fitted parameters of the reduced demo: a short job
    page.click("#job-start")
    page.wait_for_selector("#job-message:has-text('started job')")
    job = state.board.jobs("short")[0]
    assert job.kind == "posterior" and job.settings["cap"] == 40 and job.settings["steps"] is None
    assert job.settings["walkers"] == 16
    page.wait_for_selector(f"#job-{job.id}:has-text('done')", timeout=300_000)
    shot(page, "17-posterior-done")
    assert "posterior:" in page.inner_text(f"#job-{job.id}")
    summary = json.loads((state.root / "short" / job.folder / "posterior.json").read_text())
    assert summary["stop_reason"] == "cap"  # the stop rule checks from 400 steps on: a cap of 40 ends it
    status = json.loads((state.root / "short" / job.folder / "status.json").read_text())
    assert status["built_on"] == f"../{fit_id}"
