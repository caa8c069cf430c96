"""Files a scenario names: only inside the scenario's folder, with the expected extension.

A scenario can name other files: trace files of legs (``.csv`` / ``.gpx``), a factor table
(``emissions.factor_file``, ``.csv``) and an hourly grid profile
(``emissions.hourly_profile_file``, ``.csv``); a fleet file names cycles. Someone who writes
scenarios need not be someone who may read every file on the machine that runs them, so a
named file must resolve — symbolic links followed — inside the folder of the file that
names it, or inside a folder allowed on the command line (``--allow-folder``, see
:func:`allow_folders`). Errors name the file as the user wrote it and never quote its
contents.

A model built in Python without a base folder (no scenario file) is not confined.
"""
from __future__ import annotations

from pathlib import Path
from typing import Iterable

from tco.errors import InputError

__all__ = ["allow_folders", "allowed_folders", "input_file", "MAX_SCENARIO_BYTES"]

#: Largest scenario file read: a scenario is a page of settings; even 8,784 hourly values
#: inline take about 100 KiB. [bytes]
MAX_SCENARIO_BYTES = 4 * 2**20

# Folders allowed besides the naming file's own (``--allow-folder``); a module global so
# that worker processes started by fork see it too.
_ALLOWED: list[Path] = []


def allow_folders(folders: Iterable[str | Path]) -> None:
    """Allow files inside ``folders`` (resolved) besides the naming file's folder."""
    out = []
    for f in folders:
        p = Path(f).expanduser()
        if not p.is_dir():
            raise InputError("is not a folder", file=f, where="--allow-folder")
        out.append(p.resolve())
    _ALLOWED[:] = out


def allowed_folders() -> list[Path]:
    """The folders allowed with :func:`allow_folders`."""
    return list(_ALLOWED)


def input_file(name: str | Path, base_dir: str | Path | None, suffixes: tuple[str, ...],
               what: str = "file") -> Path:
    """Where a named input file is, after checking its extension and its folder.

    Parameters
    ----------
    name : str or Path
        The file as written in the scenario (relative to ``base_dir`` or absolute).
    base_dir : str or Path or None
        Folder of the file that names it, as the user gave it; None: not confined
        (relative names are then read from the working directory).
    suffixes : tuple of str
        Accepted extensions, lower case with the dot (``(".csv", ".gpx")``).
    what : str
        What the file is, for messages (``"trace file"``).

    Returns
    -------
    Path
        ``base_dir / name`` (or ``name`` if absolute), in the user's own path style.

    Raises
    ------
    InputError
        Wrong extension, outside the allowed folders, a folder, or not found; the message
        names the file as written and never its contents.
    """
    text = str(name)
    p = Path(text).expanduser()
    if p.suffix.lower() not in suffixes:
        raise InputError(f"{what} '{text}' must be a {' or '.join(suffixes)} file")
    path = p if p.is_absolute() or base_dir is None else Path(base_dir) / p
    if base_dir is not None:
        real = path.resolve()
        roots = [Path(base_dir).resolve(), *_ALLOWED]
        if not any(real.is_relative_to(r) for r in roots):
            raise InputError(
                f"{what} '{text}' is outside the scenario's folder (links followed); move it "
                "there or allow its folder with --allow-folder")
    if path.is_dir():
        raise InputError(f"{what} '{text}' is a folder, not a file")
    if not path.is_file():
        raise InputError(f"{what} '{text}' not found")
    return path
