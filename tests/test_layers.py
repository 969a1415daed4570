"""Import arrows point inward only: cli -> pipeline/report/batch -> diagnose/extract/fit ->
physics/io/flags/settings/result. A module may import its own tier or a lower one."""

import ast
import pathlib

import jjpattern

PACKAGE = pathlib.Path(jjpattern.__file__).parent

#: Tier of each top-level part of the package; higher tiers call lower ones.
TIERS = {
    "errors": 0, "flags": 0, "settings": 0, "result": 0, "sampling": 0, "provenance": 0,
    "physics": 0, "io": 0, "synthetic": 0, "demo_data": 0, "__init__": 0, "fmt": 0,
    "notebook": 0, "outdir": 0,
    "fit": 1, "extract": 1, "diagnose": 1,
    "pipeline": 2, "report": 2, "batch": 2, "catalog": 2,
    "api": 2,
    "cli": 3, "cli_catalog": 3, "cli_exit": 3, "cli_options": 3, "cli_parser": 3, "demo": 3,
}


def _part(module: str) -> str:
    part = module.split(".")[1] if "." in module else "__init__"
    return part if part in TIERS else "__init__"  # e.g. ``from . import __version__``


def _imports(path: pathlib.Path, text: str | None = None):
    rel = path.relative_to(PACKAGE.parent).with_suffix("")
    module = ".".join(rel.parts)
    package = module if path.name == "__init__.py" else module.rsplit(".", 1)[0]
    text = path.read_text(encoding="utf-8") if text is None else text
    for node in ast.walk(ast.parse(text)):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            targets = [target] if node.module else [f"{target}.{a.name}" for a in node.names]
        elif isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        else:
            continue
        for target in targets:
            if target.startswith("jjpattern.") and target != "jjpattern":
                yield module, target, node.lineno


def test_every_part_has_a_tier():
    parts = {p.stem if p.is_file() else p.name for p in PACKAGE.iterdir()
             if (p.suffix == ".py" or (p.is_dir() and (p / "__init__.py").exists()))}
    assert parts <= set(TIERS), sorted(parts - set(TIERS))
    assert _part("jjpattern.__version__") == "__init__"


def test_no_upward_import():
    upward = []
    for path in PACKAGE.rglob("*.py"):
        for module, target, line in _imports(path):
            if TIERS[_part(target)] > TIERS[_part(module)]:
                upward.append(f"{module}:{line} imports {target}")
    assert upward == []


def test_the_check_sees_an_upward_import():
    # A made-up fit module importing the report layer must be caught.
    found = list(_imports(PACKAGE / "fit" / "probe.py", "from ..report import plot\n"))
    (module, target, _), = found
    assert TIERS[_part(target)] > TIERS[_part(module)]
