"""Atomic output: build everything in a temporary folder, then move files into place.

A failed or interrupted run leaves the previous outputs as they were, and the tool never
deletes a file it did not write: files are replaced one by one with ``os.replace`` (atomic
on one filesystem), other files in the output folder are left alone.

The staging folder is ``.<target>.<pid>.<random>.part`` beside the target. It is removed
on success, on any error and on Ctrl-C or SIGTERM (the command line turns SIGTERM into the
same interruption). A process killed outright (SIGKILL, out of memory) cannot clean up, so
each run first removes staging folders of its target whose process is no longer alive
(:func:`remove_stale_stages`).

The final moves of a staged output are made with Ctrl-C and SIGTERM held back
(:func:`signals_held`): an interruption lands before the first file is moved or after the
last, never between, so an output folder is never half old and half new. Targets moved
in full are listed in :data:`COMMITTED`, so the command line can say what was written
when an interruption comes after.
"""
from __future__ import annotations

import os
import re
import shutil
import signal
import tempfile
import threading
from contextlib import contextmanager
from pathlib import Path

from tco.errors import InputError


#: Output folders this process has put in place in full, in order (cleared by the command
#: line at the start of each command).
COMMITTED: list[Path] = []


_PENDING: list[int] = []


def _defer(signum, frame) -> None:
    _PENDING.append(signum)


@contextmanager
def signals_held():
    """Hold back SIGINT and SIGTERM for the block; one that arrives meanwhile is handed to
    the handler that was in place when the block ends.

    The handlers are swapped for one that only records the signal, rather than the
    signal mask changed: a signal sent to the process may be delivered to any of its
    threads (pyarrow's, numba's, a pool's), which a mask set in the main thread does not
    cover. Outside the main thread (where no handler can be set) the block runs as is.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    held = (signal.SIGINT, signal.SIGTERM)
    old = {s: signal.signal(s, _defer) for s in held}
    try:
        yield
    finally:
        for s, handler in old.items():
            signal.signal(s, handler)
        pending, _PENDING[:] = list(_PENDING), []
        if pending:
            first, handler = pending[0], old[pending[0]]
            if callable(handler):
                handler(first, None)  # raises (Ctrl-C, the command line's SIGTERM)
            elif handler == signal.SIG_DFL:
                signal.raise_signal(first)


def file_mode() -> int:
    """The mode a new file gets under the user's umask (``0o666 & ~umask``).

    ``tempfile.mkstemp`` creates its file with mode 0600 whatever the umask; a file put in
    place from it is given this mode first, so outputs follow the umask like any file the
    user's programs write.
    """
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def write_text_atomic(path: Path, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file in the same folder."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.chmod(tmp, file_mode())
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
        os.chmod(tmp, file_mode())
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


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists, owned by someone else
        return True
    return True


def remove_stale_stages(target: Path) -> list[Path]:
    """Remove staging folders of ``target`` left by runs that no longer exist.

    Only folders named like this module's staging folders for ``target``
    (``.<name>.<pid>.<random>.part``) whose process is gone are removed; a live run's
    staging folder and every other file are left alone.

    Returns
    -------
    list of Path
        The folders removed.
    """
    target = Path(target)
    pattern = re.compile(rf"^\.{re.escape(target.name)}\.(\d+)\.[^.]+\.part$")
    removed = []
    try:
        candidates = list(target.parent.glob(f".{glob_escape(target.name)}.*.part"))
    except OSError:
        return removed
    for stage in candidates:
        m = pattern.match(stage.name)
        if not m or not stage.is_dir() or stage.is_symlink():
            continue
        pid = int(m.group(1))
        if pid != os.getpid() and not _alive(pid):
            shutil.rmtree(stage, ignore_errors=True)
            removed.append(stage)
    return removed


def glob_escape(text: str) -> str:
    """``text`` with glob wildcards escaped."""
    return re.sub(r"([*?\[])", r"[\1]", text)


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
        remove_stale_stages(target)
        stage = Path(tempfile.mkdtemp(prefix=f".{target.name}.{os.getpid()}.", suffix=".part",
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
        # Final moves: each file replaced atomically; files we did not write stay. An
        # interruption waits until all are moved (signals_held).
        with signals_held():
            for item in sorted(stage.iterdir()):
                os.replace(item, target / item.name)
            COMMITTED.append(target)
    finally:
        shutil.rmtree(stage, ignore_errors=True)
