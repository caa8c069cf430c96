"""Atomic output: build everything in a temporary folder, then move files into place.

A failed or interrupted run leaves the previous outputs as they were, and the tool never
deletes a file it did not write: files are replaced one by one with ``os.replace`` (atomic
on one filesystem), other files in the output folder are left alone.
"""
from __future__ import annotations

import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path

from tco.errors import InputError


def write_text_atomic(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_bytes_atomic(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def check_writable(folder: Path) -> None:
    """Fail early, with one line, when ``folder`` could not be created or written."""
    probe = Path(folder)
    while not probe.exists():
        probe = probe.parent
    if not probe.is_dir():
        raise InputError("is not a folder", file=probe, where="--out")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise InputError("output folder cannot be written (permission denied)", file=probe,
                         where="--out")


@contextmanager
def staged_output(target: Path):
    """Yield a temporary folder; on success move its files into ``target``.

    The staging folder sits next to ``target`` so the final moves are renames on one
    filesystem. On any error the staging folder is removed and ``target`` is untouched.

    Yields
    ------
    Path
        The staging folder to write into.
    """
    target = Path(target)
    check_writable(target)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        stage = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".part",
                                      dir=target.parent))
    except OSError as exc:
        raise InputError(f"output folder cannot be written ({exc.strerror})",
                         file=target.parent, where="--out") from None
    try:
        yield stage
        try:
            target.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"output folder cannot be written ({exc.strerror})",
                             file=target, where="--out") from None
        if not target.is_dir():
            raise InputError("exists and is not a folder", file=target, where="--out")
        # Final moves: each file replaced atomically; files we did not write stay.
        for item in sorted(stage.iterdir()):
            os.replace(item, target / item.name)
    finally:
        shutil.rmtree(stage, ignore_errors=True)
