"""Progress bars: shown on a terminal's stderr, never on stdout, and not at all where stderr is not a
terminal (the behaviour asked for in issue 14; rich renders the bars)."""

from __future__ import annotations

import io
import sys

from surfcheck.progress import step, track


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_a_terminal_sees_each_step_on_stderr_and_stdout_stays_empty(monkeypatch, capsys):
    terminal = _Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    with step("reading part.stl"):
        assert list(track([1, 2, 3], "cutting sections")) == [1, 2, 3]
    assert "reading part.stl" in terminal.getvalue()
    assert "cutting sections" in terminal.getvalue()
    assert capsys.readouterr().out == ""


def test_nothing_is_shown_where_stderr_is_not_a_terminal(capsys):
    with step("reading part.stl") as advance:
        advance(5)
        assert list(track(iter("ab"), "stations")) == ["a", "b"]
    captured = capsys.readouterr()
    assert captured.out == "" and captured.err == ""
