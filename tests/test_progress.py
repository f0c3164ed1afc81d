"""The progress bar: drawn only on a terminal, with the time elapsed and the time left."""

import io
import os
import re
import select

from sdrx.progress import TerminalBar, make_progress


def _fake_clock(times):
    it = iter(times)
    return lambda: next(it)


def test_time_left_is_the_rest_at_the_mean_rate_so_far():
    out = io.StringIO()
    # created at 0 s; 10 % done at 6 s -> 54 s left; 60 % at 30 s -> 20 s left; 3725 s left of an hour-long job
    bar = TerminalBar("receive", out, clock=_fake_clock([0.0, 6.0, 30.0, 3725.0 * 3 / 2]))
    bar(100, 1000)
    bar(600, 1000)
    bar(1200, 3000)   # 40 % after 5587.5 s: 8381 s (2:19:41) left
    lines = out.getvalue().split("\r")[1:]
    assert re.search(r"10\.0%\s+0:06 elapsed,\s+0:54 left$", lines[0])
    assert re.search(r"60\.0%\s+0:30 elapsed,\s+0:20 left$", lines[1])
    assert re.search(r"40\.0%\s+1:33:08 elapsed,\s+2:19:41 left$", lines[2])


def test_time_left_waits_for_one_percent_and_lines_keep_their_width():
    out = io.StringIO()
    bar = TerminalBar("synth", out, clock=_fake_clock([0.0, 1.0, 2.0, 3.0]))
    bar(0, 1000)
    bar(5, 1000)
    bar(1000, 1000)
    lines = out.getvalue().split("\r")[1:]
    assert lines[0].endswith("--:-- left") and lines[1].endswith("--:-- left")
    assert lines[2].endswith(" 0:00 left")
    assert len({len(line) for line in lines}) == 1   # a shorter line would leave characters of the last one


def test_bar_only_on_a_terminal():
    master, slave = os.openpty()
    try:
        with os.fdopen(slave, "w") as tty:
            bar = make_progress("receive", stream=tty)
            assert isinstance(bar, TerminalBar)
            bar(50, 100)
            bar.close()
            assert make_progress("receive", quiet=True, stream=tty) is None
        drawn = ""
        while not drawn.endswith("\n") and select.select([master], [], [], 2.0)[0]:
            drawn += os.read(master, 4096).decode()   # the terminal may hand the line over in pieces
        assert "50.0%" in drawn and "left" in drawn and drawn.endswith("\n")
    finally:
        os.close(master)
    assert make_progress("receive", stream=io.StringIO()) is None
