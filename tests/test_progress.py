"""The terminal progress bar: silent off a terminal, one bar per stage on one."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import io

import pytest

from roundscore.support.progress import terminal_bar


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_quiet_when_not_a_terminal():
    out = io.StringIO()
    bar = terminal_bar(out)
    for i in range(1, 6):
        bar("lab sheets", i, 5)
    assert out.getvalue() == "" and not bar.enabled


@pytest.mark.parametrize("stages", [["lab sheets"], ["figures", "lab pages"]])
def test_one_bar_per_stage_on_a_terminal(stages):
    out = _Tty()
    bar = terminal_bar(out)
    for stage in stages:
        for i in range(1, 4):
            bar(stage, i, 3)
    text = out.getvalue()
    for stage in stages:
        assert f"{stage}: 100%" in text and "3/3" in text
    assert bar._bar is None  # each finished stage closed its bar


def test_forced_off_and_a_new_stage_closes_the_last():
    out = _Tty()
    assert terminal_bar(out, enabled=False).enabled is False
    bar = terminal_bar(out)
    bar("reading forms", 2, 10)
    bar("lab sheets", 1, 4)
    bar.close()
    assert "reading forms" in out.getvalue() and "lab sheets" in out.getvalue()
