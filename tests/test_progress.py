"""Progress display (issue 15): a bar on a terminal, heartbeat lines in logs."""

from __future__ import annotations

import io
import re

import pytest

from qcorr.progress import HEARTBEAT_LINES, heartbeat_line, progress, progress_style


class FakeClock:
    """A clock that advances by a fixed step at each call (seconds)."""

    def __init__(self, step: float) -> None:
        self.now, self.step = 0.0, step

    def __call__(self) -> float:
        value = self.now
        self.now += self.step
        return value


def test_log_stream_gets_one_line_per_tenth_with_rate_and_time_left():
    stream = io.StringIO()  # not a terminal
    clock = FakeClock(0.01)  # every item takes 10 ms: 100 frames/s
    items = list(progress(range(1000), total=1000, desc="frames", stream=stream, clock=clock))
    assert items == list(range(1000))
    lines = stream.getvalue().splitlines()
    assert len(lines) == HEARTBEAT_LINES == 10
    first = re.fullmatch(r"qcorr: frames 100/1000 \(10 %\), ([0-9.]+) frames/s, about "
                         r"0:00:(\d\d) left", lines[0])
    assert first, lines[0]
    assert float(first.group(1)) == pytest.approx(100.0)
    assert int(first.group(2)) == 9  # 900 frames left at 100 frames/s
    assert lines[-1].startswith("qcorr: frames 1000/1000 (100 %)")
    assert lines[-1].endswith("about 0:00:00 left")


def test_never_prints_nothing_and_terminal_gets_a_bar():
    stream = io.StringIO()
    assert list(progress(range(5), total=5, mode="never", stream=stream)) == list(range(5))
    assert stream.getvalue() == ""

    class Terminal(io.StringIO):
        def isatty(self) -> bool:
            return True

    assert progress_style("auto", Terminal()) == "bar"
    assert progress_style("auto", io.StringIO()) == "log"
    assert progress_style("log", Terminal()) == "log"
    with pytest.raises(ValueError, match="choose one of"):
        progress_style("sometimes")  # type: ignore[arg-type]


def test_unknown_total_gives_elapsed_time():
    line = heartbeat_line(500, None, 10.0, "frames", "frame")
    assert line == "qcorr: frames 500 done, 50 frames/s, 0:00:10 so far"


def test_fast_rates_are_whole_numbers_without_exponent():
    """A rate of 15,460 frames/s reads as such (the demo's small systems read that fast)."""
    from qcorr.progress import heartbeat_line

    line = heartbeat_line(1546, 4000, 0.1, "frames", "frame")
    assert "15460 frames/s" in line and "e+" not in line
