"""Test helper: recalculate a workbook with LibreOffice headless.

openpyxl writes formulas without cached values; a spreadsheet program must compute them
before ``openpyxl.load_workbook(path, data_only=True)`` can read results. This helper runs
``soffice --headless --convert-to xlsx`` (LibreOffice Calc) on a copy, with its own
user-profile folder per call (a shared profile makes one of several parallel calls exit
silently with nothing written — library notes), and forces a full recalculation on load
(``OOXMLRecalcMode`` = 0, "always"), so even stale cached values are recomputed.

Tests that use it are marked ``@pytest.mark.slow`` and decorated with
:data:`needs_soffice`, which skips them when LibreOffice is not installed.
"""
from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

import pytest

SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")

#: Skip marker for tests that need LibreOffice.
needs_soffice = pytest.mark.skipif(SOFFICE is None,
                                   reason="LibreOffice (soffice) is not installed")

# Registry entries: recalculate OOXML and ODF files on load always (0), not never/ask.
_ITEM = ('<item oor:path="/org.openoffice.Office.Calc/Formula/Load">'
         '<prop oor:name="{}" oor:op="fuse"><value>0</value></prop></item>')
_XCU = ('<?xml version="1.0" encoding="UTF-8"?>\n'
        '<oor:items xmlns:oor="http://openoffice.org/2001/registry"'
        ' xmlns:xs="http://www.w3.org/2001/XMLSchema"'
        ' xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">\n'
        + _ITEM.format("OOXMLRecalcMode") + "\n" + _ITEM.format("ODFRecalcMode") + "\n"
        "</oor:items>\n")


def recalculate(xlsx_path, outdir=None, timeout: float = 180.0) -> Path:
    """Recalculate a workbook with LibreOffice and return the recalculated copy.

    Parameters
    ----------
    xlsx_path : str or Path
        The workbook (left untouched).
    outdir : str or Path, optional
        Folder for the result (default: a new folder next to the input). Must not be the
        input's own folder, since the output keeps the input's file name.
    timeout : float
        Seconds before LibreOffice is given up on. [s]

    Returns
    -------
    Path
        The recalculated ``.xlsx``; read it with ``openpyxl.load_workbook(p,
        data_only=True)``.

    Raises
    ------
    RuntimeError
        LibreOffice is missing, failed, or wrote nothing.
    """
    if SOFFICE is None:
        raise RuntimeError("LibreOffice (soffice) is not installed")
    src = Path(xlsx_path).resolve()
    out = Path(outdir) if outdir is not None else Path(
        tempfile.mkdtemp(prefix="recalc-", dir=src.parent))
    out = out.resolve()
    if out == src.parent:
        raise ValueError("outdir must differ from the input's folder")
    return _convert(src, out, "xlsx", timeout, "recalculation", settings=_XCU)


def _convert(src: Path, out: Path, fmt: str, timeout: float, what: str,
             settings: str | None = None) -> Path:
    """Convert ``src`` into ``out`` with headless LibreOffice in a throw-away profile
    (``settings``: its registrymodifications.xcu, if any) and return the written file."""
    out.mkdir(parents=True, exist_ok=True)
    profile = Path(tempfile.mkdtemp(prefix="lo-profile-"))
    try:
        if settings is not None:
            (profile / "user").mkdir()
            (profile / "user" / "registrymodifications.xcu").write_text(settings,
                                                                       encoding="utf-8")
        cmd = [SOFFICE, f"-env:UserInstallation={profile.as_uri()}", "--headless",
               "--norestore", "--nologo", "--convert-to", fmt, "--outdir", str(out),
               str(src)]
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
    finally:
        shutil.rmtree(profile, ignore_errors=True)
    result = out / (src.stem + "." + fmt)
    if proc.returncode != 0 or not result.exists():
        raise RuntimeError(f"LibreOffice {what} failed (exit {proc.returncode}): "
                           f"{proc.stderr.strip() or proc.stdout.strip() or 'no output'}")
    return result


def to_pdf(xlsx_path, outdir, timeout: float = 180.0) -> Path:
    """Print a workbook to PDF with LibreOffice (every sheet, its own page setup).

    Parameters
    ----------
    xlsx_path : str or Path
    outdir : str or Path
        Folder for the PDF (created; must differ from the input's folder).

    Returns
    -------
    Path
        The PDF.
    """
    if SOFFICE is None:
        raise RuntimeError("LibreOffice (soffice) is not installed")
    return _convert(Path(xlsx_path).resolve(), Path(outdir).resolve(), "pdf", timeout,
                    "PDF export")
