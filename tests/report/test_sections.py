"""Report sections from results: next-run suggestion, QA block, parameter values on the chemist's scale,
why sampling stopped, the window's trust status; the process file's [report] table."""

from __future__ import annotations

import json
import re
import tomllib
from types import SimpleNamespace

import pytest

from speciakin.errors import ModelFileError
from speciakin.report.assemble.decision import decision_summary_section
from speciakin.report.assemble.parameters import natural_value
from speciakin.report.assemble.posterior import stop_words
from speciakin.report.assemble.qa import document_id, qa_section, strip_absolute_paths
from speciakin.report.assemble.suggest import suggestion_section

# an invented suggest.json body (the shape of SuggestResult.to_dict(); numbers invented)
SUGGESTION = {
    "schema": "speciakin.suggest/1", "method": "linear", "helps": True,
    "message": "Run next at pH 8.50: the window edges narrow most there.",
    "thresholds": {"min_gain_pH": 0.1}, "parameters_that_move_outcomes": ["pKa[S.N1]"],
    "candidates": [
        {"rank": 1, "conditions": {"setpoint_pH": 8.5}, "reason": "the free amine is seen",
         "expected": {"window_edge_credible_width_pH": {"low": {"before": 0.6, "after": 0.2, "reduction": 0.4},
                                                       "high": {"before": 0.5, "after": 0.4, "reduction": 0.1}},
                      "undecided_width_pH": {"before": 0.9, "after": 0.5, "reduction": 0.4},
                      "d_optimal": {"gain_nats": 1.25, "volume_shrinkage": 0.3}}},
        {"rank": 2, "conditions": {"setpoint_pH": 9.0, "temperature_C": 30.0}, "reason": "second best",
         "expected": {"window_edge_credible_width_pH": None, "undecided_width_pH": None,
                      "d_optimal": {"gain_nats": 0.5, "volume_shrinkage": 0.6}}},
    ],
    "batch": [], "notes": [],
}


def _text(section) -> str:
    return json.dumps(section.to_dict())


def test_suggestion_section_shows_top_candidates_and_is_absent_without_a_suggestion(tmp_path):
    assert suggestion_section(None) is None
    section = suggestion_section(SUGGESTION)
    table = next(b for b in section.blocks if getattr(b, "block_kind", "") == "table")
    assert table.rows[0][:3] == [1, "pH 8.50", 0.4]
    assert table.rows[1][1] == "pH 9.00, 30 C" and table.rows[1][2] is None  # no decision: empty cell
    assert "the free amine is seen" in _text(section) and "Run next at pH 8.50" in _text(section)


def test_load_suggestion_reads_the_output_folder(tmp_path):
    from speciakin.errors import InputError
    from speciakin.pipeline.outputs import load_suggestion

    assert load_suggestion(tmp_path) is None
    (tmp_path / "suggest.json").write_text(json.dumps(SUGGESTION))
    assert load_suggestion(tmp_path)["candidates"][0]["rank"] == 1
    (tmp_path / "suggest.json").write_text(json.dumps({"schema": "x"}))
    with pytest.raises(InputError, match="suggest"):
        load_suggestion(tmp_path)


def test_values_on_the_chemists_scale():
    # 10 ** 1.036 = 10.86 (arithmetic); a shift of -0.32 from 9.60 is pKa 9.28
    assert natural_value({"value": 1.036, "unit": "log10(L/(mol*s))", "shift_of": None}) == "k = 10.9 L/(mol*s)"
    assert natural_value({"value": -0.32, "unit": "pK units (shift)", "shift_of": 9.6,
                          "implied_value": 9.28}) == "pKa 9.28"
    assert natural_value({"value": 0.4, "unit": "", "shift_of": None}) is None


def test_why_sampling_stopped_in_words():
    posterior = SimpleNamespace(stop_reason="cap", stop_message="5000 steps reached; R-hat 1.05",
                                stop_checks=[{}, {}])
    text = stop_words(posterior)
    assert "cap on steps" in text and "R-hat 1.05" in text and "2 convergence checks" in text
    assert stop_words(SimpleNamespace()) == "not recorded"


def _window(status, reasons=()):
    return SimpleNamespace(status=status, status_reasons=list(reasons), gates=[
        {"name": "convergence", "verdict": "provisional", "reasons": list(reasons)}],
        primary_window=(7.6, 8.4), robust_windows=[(7.9, 8.1)], windows=[(7.6, 8.4)], best_ph=8.0,
        best_probability=0.99, mc_confidence=0.95, level=0.95, tolerance=0.3, outcome_names=[], uncertainty_source="posterior",
        n_draws=100, specifications=[], warnings=[], ph=[7.0, 8.0, 9.0])


@pytest.mark.parametrize("status", ["provisional", "not established", None])
def test_a_window_that_is_not_established_is_not_recommended(status):
    section = decision_summary_section(_window(status, ["R-hat above 1.01"] if status else []), None, None)
    callout = section.blocks[0]
    assert callout.kind == "decision"
    assert not callout.title.startswith("Recommended")
    assert f"Status: {status or 'not checked'}" in callout.text
    if status:
        assert "R-hat above 1.01" in callout.text


def test_an_established_window_is_recommended():
    callout = decision_summary_section(_window("established"), None, None).blocks[0]
    assert callout.title == "Recommended: pH 7.60 to 8.40" and "Status: established" in callout.text


def test_window_warnings_read_as_sentences():
    window = _window("established")
    window.warnings = ["window touches the upper end of the scanned range (pH 9.00): it may go on beyond"]
    warned = [b for b in decision_summary_section(window, None, None).blocks
              if getattr(b, "kind", "") == "warning" and b.title == "pH window"]
    assert [b.text for b in warned] == ["Window touches the upper end of the scanned range (pH 9.00): it may "
                                        "go on beyond."]


def test_page_one_says_what_to_do_next_and_what_the_suggestion_found():
    window = _window("provisional", ["window edge pH 7.60 lies 0.60 pH above the highest run pH"])
    window.next_steps = ["Add a run at pH 7.6: the window's edge lies outside the pH 6.00 to 7.00 the runs covered."]
    text = decision_summary_section(window, None, None, suggestion=SUGGESTION).blocks[0].text
    assert "What to do next: Add a run at pH 7.6:" in text
    assert "Next-run suggestion (its own section below): Run next at pH 8.50" in text
    # a suggestion that finds no run helping much does not contradict the run the gate asks for
    text = decision_summary_section(window, None, None, suggestion=dict(SUGGESTION, helps=False)).blocks[0].text
    assert "within the model, no candidate run narrows the window's uncertainty much. A run asked for above " \
           "still tests the model where no run has been" in text
    plain = decision_summary_section(_window("established"), None, None).blocks[0].text
    assert "What to do next" not in plain and "Next-run suggestion" not in plain


def test_document_id_follows_the_content_and_qa_names_people():
    a = document_id({"sections": [1, 2]})
    assert re.fullmatch(r"SK-[0-9A-F]{16}", a)
    assert a == document_id({"sections": [1, 2]}) and a != document_id({"sections": [1, 3]})
    rows = dict(qa_section(a, "A. Author", "").blocks[0].rows)
    assert rows["Author"] == "A. Author" and rows["Reviewer"] == "not stated" and rows["Document ID"] == a


def test_absolute_paths_are_removed_but_units_stay(tmp_path):
    text = f"speciakin report {tmp_path}/out --campaign /home/someone/lab/campaign.xlsx; k in L/(mol*s), +/- 0.3"
    cleaned = strip_absolute_paths(text, tmp_path)
    assert cleaned == "speciakin report out --campaign campaign.xlsx; k in L/(mol*s), +/- 0.3"


def _process_text() -> str:
    from speciakin.demo import demo_dir

    return (demo_dir() / "process.toml").read_text(encoding="utf-8")


def test_process_file_report_table_names_author_and_reviewer():
    from speciakin.decision.process import parse_process

    text = _process_text() + '\n[report]\nauthor = "A. Chemist"\nreviewer = "B. Reviewer"\n'
    plan = parse_process(tomllib.loads(text), "process.toml", text)
    assert (plan.report_author, plan.report_reviewer) == ("A. Chemist", "B. Reviewer")
    bad = _process_text() + '\n[report]\nauthor = 3\nsigned = "x"\n'
    with pytest.raises(ModelFileError) as err:
        parse_process(tomllib.loads(bad), "process.toml", bad)
    message = str(err.value)
    assert "report.author" in message and "report.signed" in message


def test_commit_says_uncommitted_changes_of_the_code_only(tmp_path):
    # a checkout whose report folder changed (a report written into it) still runs the commit's code;
    # a changed file of the package does not
    import shutil
    import subprocess

    from speciakin.report.assemble.qa import tool_commit

    if shutil.which("git") is None:
        pytest.skip("git is not installed")
    package = tmp_path / "src" / "speciakin"
    package.mkdir(parents=True)
    (package / "__init__.py").write_text("x = 1\n")
    (tmp_path / "reports").mkdir()
    (tmp_path / "reports" / "report.html").write_text("old\n")

    def git(*args):
        subprocess.run(["git", *args], cwd=tmp_path, check=True, capture_output=True)

    git("init", "-q")
    git("add", "-A")
    git("-c", "user.name=t", "-c", "user.email=t@example.invalid", "commit", "-qm", "start")
    head = subprocess.run(["git", "rev-parse", "HEAD"], cwd=tmp_path, capture_output=True, text=True).stdout.strip()
    assert tool_commit(package) == head
    (tmp_path / "reports" / "report.html").write_text("new\n")
    assert tool_commit(package) == head
    (package / "__init__.py").write_text("x = 2\n")
    assert tool_commit(package) == head + " (with uncommitted changes)"
    assert tool_commit(tmp_path / "elsewhere") == "unknown"
