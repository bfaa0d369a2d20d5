"""The progress bar: tqdm on stderr, off when stderr is not a terminal."""

import io
import sys

from sectio.commands._common import progress_bar


class _Tty(io.StringIO):
    def isatty(self):
        return True


def test_bar_off_when_not_a_terminal(monkeypatch):
    buf = io.StringIO()
    monkeypatch.setattr(sys, "stderr", buf)
    assert list(progress_bar(range(3), desc="grains")) == [0, 1, 2]
    assert buf.getvalue() == ""


def test_bar_on_a_terminal_counts_fields(monkeypatch):
    buf = _Tty()
    monkeypatch.setattr(sys, "stderr", buf)
    assert list(progress_bar(["a.tif", "b.tif"], desc="grains")) == ["a.tif", "b.tif"]
    out = buf.getvalue()
    # tqdm draws the bar (0/2 at the start; updates are throttled) and clears it at the end.
    assert "grains:" in out and "/2" in out and "field/s" in out
