"""The command line's notes (logger ``speciakin``) go to the stderr of the moment."""
import io
import logging
import sys

from speciakin.cli.main import show_notes


def test_a_note_after_stderr_was_replaced_reaches_the_new_stream(monkeypatch):
    # A notebook or a test harness replaces sys.stderr between commands; the
    # handler made for the first must neither write to the old (closed) stream
    # nor turn the note into a logging error with a traceback.
    first = io.StringIO()
    monkeypatch.setattr(sys, "stderr", first)
    show_notes()
    logging.getLogger("speciakin.simulation").info("first note")
    assert "speciakin: first note" in first.getvalue()
    first.close()
    second = io.StringIO()
    monkeypatch.setattr(sys, "stderr", second)
    show_notes()
    logging.getLogger("speciakin.simulation").info("second note")
    text = second.getvalue()
    assert "speciakin: second note" in text
    assert "Traceback" not in text and "Logging error" not in text
