"""The installed package carries every module: CI installs with a plain ``pip install .``."""
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_every_package_folder_is_listed_in_pyproject():
    # a sub-package missing from [tool.setuptools] packages installs without its modules
    # (seen: tco.report.workbook), which only a non-editable install shows
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
                 ["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts)
             for p in (ROOT / "tco").rglob("__init__.py")}
    assert found - listed == set()
