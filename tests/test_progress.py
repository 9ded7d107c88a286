"""The progress bar: only on a terminal, only when not quiet, only after ~2 s."""

from __future__ import annotations

import io

from sheetcycle.progress import Progress


class FakeTTY(io.StringIO):
    def isatty(self) -> bool:
        return True


class Clock:
    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def run(stream: io.StringIO, *, enabled: bool | None = None, step: float = 0.5) -> str:
    clock = Clock()
    with Progress(10, label="rows", stream=stream, enabled=enabled, clock=clock) as bar:
        for _ in range(10):
            clock.now += step
            bar.update()
    return stream.getvalue()


def test_long_run_on_a_terminal_draws_a_bar_and_ends_with_a_newline() -> None:
    out = run(FakeTTY())
    assert out.startswith("\r") and out.endswith("\n")
    frames = out.rstrip("\n").split("\r")[1:]
    # nothing before 2 s: the first frame is drawn at the 4th update (2.0 s)
    assert frames[0].startswith("rows [") and " 4/10 " in frames[0]
    assert frames[-1] == "rows [" + "#" * 28 + "] 10/10 100%"
    assert out.count("\n") == 1


def test_short_run_prints_nothing() -> None:
    assert run(FakeTTY(), step=0.1) == ""  # 1 s in all


def test_not_a_terminal_prints_nothing() -> None:
    assert run(io.StringIO()) == ""


def test_quiet_prints_nothing_even_on_a_terminal() -> None:
    assert run(FakeTTY(), enabled=False) == ""


def test_redraws_are_throttled_and_overwrite_the_previous_text() -> None:
    stream = FakeTTY()
    clock = Clock()
    with Progress(1000, label="cycles", stream=stream, clock=clock) as bar:
        clock.now += 3.0
        for _ in range(1000):
            clock.now += 0.0001  # 0.1 s for the lot: one frame plus the final one
            bar.update()
    frames = stream.getvalue().rstrip("\n").split("\r")[1:]
    assert len(frames) == 2
    assert frames[-1].startswith("cycles [" + "#" * 28 + "] 1000/1000")


def test_a_shorter_frame_is_padded_over_the_longer_one() -> None:
    stream = FakeTTY()
    clock = Clock()
    with Progress(0, label="rows", stream=stream, clock=clock) as bar:
        clock.now += 3.0
        bar.update(12345)  # 'rows 12345'
        bar.label = "r"
        clock.now += 1.0
        bar.update(1)  # 'r 12346', padded with spaces to the old length
    frames = stream.getvalue().rstrip("\n").split("\r")[1:]
    assert frames == ["rows 12345", "r 12346   "]


def test_line_text_is_plain_ascii() -> None:
    bar = Progress(8, label="rows", stream=io.StringIO(), enabled=False)
    bar.update(2)
    assert bar.line() == "rows [" + "#" * 7 + "-" * 21 + "] 2/8  25%"
    assert bar.line().isascii()
