"""The command line's progress bars (``cli._common.StageProgress``)."""

import contextlib
import io
import time

from speciakin.cli._common import StageProgress


def test_bar_follows_callbacks_and_reports_a_current_rate():
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        progress = StageProgress()
        for done in (10, 30, 50):
            time.sleep(0.12)                 # past tqdm's default refresh interval (0.1 s)
            progress("window", done, 100)
        bar = progress.bars["window"]
        # tqdm's smoothed rate (and so its time left) is fed only by update(); a bar whose
        # count is set directly shows no current rate (format_dict["rate"] is None).
        assert bar.n == 50 and bar.total == 100
        assert bar.format_dict["rate"] is not None
        progress("window", 20, 120)          # a stage that starts over, with a new total
        assert bar.n == 20 and bar.total == 120
        progress("window", 120, 120)
        assert bar.disable or bar.n == 120
    assert "pH window (batches)" in err.getvalue()


def test_disabled_progress_writes_nothing():
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        progress = StageProgress(enabled=False)
        progress("fit", 1, 2)
    assert err.getvalue() == "" and progress.bars == {}
