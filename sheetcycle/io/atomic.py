"""Write an output file all at once or not at all.

A writer gets a temporary path in the output's own folder (so the final rename stays on one
file system), writes there, and the temporary file replaces the output only when the writer
finished without an exception. Refusals (output exists, output is an input) happen before
anything is created.
"""

from __future__ import annotations

import fcntl
import glob
import os
import secrets
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from sheetcycle.errors import SheetcycleError, WriteError

__all__ = ["atomic_output", "write_error"]

_TMP_TAG = ".sheetcycle-tmp-"


def write_error(problem: str, **fields: Any) -> WriteError:
    """A :class:`WriteError` with its structured fields (file, found, expected ...).

    ``WriteError(problem, file=...)`` raises TypeError as errors.py stands: ``OSError.__new__``
    refuses keyword arguments. Build it in two steps until that is fixed there.
    """
    err = WriteError(problem)
    SheetcycleError.__init__(err, problem, **fields)
    return err


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet): compare the names
        return a.resolve() == b.resolve()


def _check_target(path: Path, *, force: bool, inputs: Iterable[Path]) -> None:
    for source in inputs:
        if _same_file(path, Path(source)):
            raise write_error(
                "output would overwrite an input file",
                file=str(path),
                expected="an output path different from every input",
                found=str(source),
            )
    if path.is_dir():
        raise write_error("output path is a folder", file=str(path), expected="a file name")
    if path.exists() and not force:
        raise write_error("output exists; use --force to overwrite", file=str(path))
    if not path.parent.is_dir():
        raise write_error("output folder does not exist", file=str(path), found=str(path.parent))


#: Open, locked descriptors of this process's temporary files: the lock tells another run
#: that the writer is alive; a killed writer's lock is gone with it.
_LOCKS: dict[Path, int] = {}


def _clear_stale(path: Path) -> None:
    """Remove temporary files of ``path`` that killed runs left behind (their lock is free)."""
    for old in path.parent.glob(f".{glob.escape(path.stem)}{_TMP_TAG}*{path.suffix}"):
        try:
            fd = os.open(old, os.O_RDONLY)
        except OSError:
            continue
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)  # a live writer holds it
            continue
        try:
            old.unlink()
        except OSError:
            pass
        finally:
            os.close(fd)


def _make_temp(path: Path) -> Path:
    """Create an empty temporary file beside ``path``; its mode follows the umask."""
    _clear_stale(path)
    for _ in range(8):
        tmp = path.with_name(f".{path.stem}{_TMP_TAG}{secrets.token_hex(6)}{path.suffix}")
        try:
            fd = os.open(tmp, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o666)
        except FileExistsError:
            continue
        except OSError as exc:
            raise write_error(
                f"cannot create a file in the output folder ({exc.strerror})", file=str(path)
            ) from exc
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            _LOCKS[tmp] = fd
        except OSError:
            os.close(fd)
        return tmp
    raise write_error("cannot find a free temporary name in the output folder", file=str(path))


def _release(tmp: Path) -> None:
    fd = _LOCKS.pop(tmp, None)
    if fd is not None:
        os.close(fd)


def _discard(tmp: Path) -> None:
    try:
        tmp.unlink()
    except FileNotFoundError:
        pass
    finally:
        _release(tmp)


@contextmanager
def atomic_output(path: Path, *, force: bool, inputs: Iterable[Path] = ()) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; move it onto ``path`` if the block succeeds.

    Raises :class:`WriteError` before creating anything when ``path`` exists and ``force``
    is false, when ``path`` is one of ``inputs``, is a folder, or its folder is missing.
    On any exception inside the block the temporary file is deleted and the exception
    propagates unchanged; ``path`` is left as it was.
    """
    path = Path(path)
    inputs = [Path(p) for p in inputs]
    _check_target(path, force=force, inputs=inputs)
    tmp = _make_temp(path)
    try:
        yield tmp
        if not force and path.exists():  # appeared while we were writing
            raise write_error("output exists; use --force to overwrite", file=str(path))
        try:
            os.replace(tmp, path)
            _release(tmp)
        except OSError as exc:
            raise write_error(
                f"cannot move the finished output into place ({exc.strerror})", file=str(path)
            ) from exc
    except BaseException:
        _discard(tmp)
        raise
