"""Where the shipped templates and demo inputs are, installed or in a source tree.

In a source checkout they live at the top of the repository (``templates/``,
``inputs/``); an installed package carries them as ``tco.templates`` and ``tco.inputs``.
"""
from __future__ import annotations

from pathlib import Path

_PACKAGE = Path(__file__).resolve().parent
_REPO = _PACKAGE.parent


def _folder(name: str) -> Path:
    installed = _PACKAGE / name  # tco/templates, tco/inputs inside an installed package
    return installed if installed.is_dir() else _REPO / name


def templates_dir() -> Path:
    """Folder of the report templates and stylesheet."""
    return _folder("templates")


def inputs_dir() -> Path:
    """Folder of the bundled demo scenario and example traces."""
    return _folder("inputs")


def demo_path() -> Path:
    """The bundled demo scenario."""
    return inputs_dir() / "demo.toml"
