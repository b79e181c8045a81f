"""The installed package must contain every source package of the repo."""

import pathlib
import tomllib

ROOT = pathlib.Path(__file__).resolve().parent.parent


def test_every_package_is_listed_in_pyproject():
    config = tomllib.loads((ROOT / "pyproject.toml").read_text())
    listed = set(config["tool"]["setuptools"]["packages"])
    found = set()
    for init in (ROOT / "gfla").rglob("__init__.py"):
        rel = init.parent.relative_to(ROOT)
        found.add(".".join(rel.parts))
    for init in (ROOT / "cli").rglob("__init__.py"):
        rel = init.parent.relative_to(ROOT / "cli")
        found.add(".".join(("gfla", "cli") + rel.parts))
    assert found <= listed, f"missing from pyproject packages: {sorted(found - listed)}"
