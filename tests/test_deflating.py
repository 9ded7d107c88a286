"""The sheet writer's background deflating keeps the chunks' order and loses no error."""

from __future__ import annotations

import pytest

from sheetcycle.io.package import _Deflating


def test_chunks_arrive_in_order() -> None:
    got: list[bytes] = []
    chunks = [bytes([k % 256]) * (k + 1) for k in range(200)]
    with _Deflating(got.append) as write:
        for c in chunks:
            write(c)
    assert got == chunks


def test_an_error_in_the_thread_reaches_the_caller() -> None:
    seen: list[bytes] = []

    def failing(chunk: bytes) -> None:
        if len(seen) == 3:
            raise OSError("disk full")
        seen.append(chunk)

    with pytest.raises(OSError, match="disk full"):
        with _Deflating(failing) as write:
            for k in range(50):
                write(b"x" * k)
    assert len(seen) == 3  # nothing is written after the failure
