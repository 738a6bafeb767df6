"""What `pip install .` ships: every package folder of pqcheck, and its data files."""

from pathlib import Path

import tomllib

ROOT = Path(__file__).resolve().parents[1]


def test_every_package_folder_is_listed_for_installation():
    cfg = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    listed = set(cfg["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts)
             for p in (ROOT / "pqcheck").rglob("__init__.py")}
    missing = found - listed
    assert not missing, f"add to [tool.setuptools] packages: {sorted(missing)}"
