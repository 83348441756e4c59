"""Packaging: every package folder ships, and the rules are found from the installed package."""

import tomllib
from pathlib import Path

ROOT = Path(__file__).parents[1]


def test_every_package_folder_is_listed_in_pyproject():
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = {
        "famwise." + ".".join(p.parent.relative_to(ROOT / "workflow" / "famwise").parts)
        for p in (ROOT / "workflow" / "famwise").rglob("__init__.py")
    }
    found = {name.rstrip(".") for name in found} | {"famwise.rules"}
    assert found == listed, (
        f"pyproject.toml [tool.setuptools] packages differs from the package folders: {sorted(found ^ listed)}"
    )


def test_workflow_entry_is_the_packaged_rules():
    from famwise.launch import workflow_entry

    entry = workflow_entry()
    assert entry.name == "main.smk" and entry.is_file()
    includes = [line.split('"')[1] for line in entry.read_text().splitlines() if line.strip().startswith("include:")]
    assert all((entry.parent / name).is_file() for name in includes)


def test_every_module_imports():
    """Catches a module left calling a name that moved (e.g. a benchmark only `famwise bench` imports)."""
    import importlib
    import pkgutil

    import famwise

    for module in pkgutil.walk_packages(famwise.__path__, "famwise."):
        if module.name.endswith("__main__"):
            continue
        importlib.import_module(module.name)
