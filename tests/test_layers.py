"""The import order of DEVELOPERS.md: a module imports only its own layer and the layers above it.

Source: the project's design (shared DESIGN.md, "Architecture"); the list below is the table in
DEVELOPERS.md, and `test_layer_table_matches_developers_md` keeps the two the same.
"""

import ast
import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "surfcheck"

# Top to bottom: a unit may import the units before it and itself, never one after it.
LAYERS = [
    "version", "errors", "progress", "part", "polyline", "validation", "seams",
    "geometry", "cad", "io", "summary",
    "segmentation", "grading", "blend", "review", "lots", "demo",
    "cli",
]
TOP = {"__init__", "__main__", "cli"}


def _unit(module: str) -> str:
    """The layer unit of a dotted module name below `surfcheck`."""
    return module.split(".")[1] if "." in module else "__init__"


def _imports(path: Path) -> list[tuple[int, str]]:
    """Every surfcheck module imported anywhere in a file (function-level imports too)."""
    tree = ast.parse(path.read_text(), filename=str(path))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names if a.name.startswith("surfcheck.")]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module == "surfcheck":
                found += [(node.lineno, f"surfcheck.{a.name}") for a in node.names]
            elif node.module.startswith("surfcheck."):
                found.append((node.lineno, node.module))
    return found


def layer_violations(package: Path = PACKAGE) -> list[str]:
    """Lines `file:line imports module` where a module reaches a layer below its own."""
    rank = {name: i for i, name in enumerate(LAYERS)}
    problems = []
    for path in sorted(package.rglob("*.py")):
        own = _unit("surfcheck." + ".".join(path.relative_to(package).with_suffix("").parts))
        if own in TOP:
            continue
        assert own in rank, f"{path} is in no layer of LAYERS: add its unit to DEVELOPERS.md and here"
        for line, module in _imports(path):
            target = _unit(module)
            assert target in rank or target in TOP, f"{path}:{line} imports unknown unit {module}"
            if target in TOP or rank[target] > rank[own]:
                problems.append(f"{path.relative_to(package.parent)}:{line} imports {module}")
    return problems


def test_no_module_imports_a_layer_below_it():
    assert layer_violations() == []


def test_the_check_catches_an_upward_import(tmp_path):
    # A test that cannot fail is a defect: a geometry module importing grading must be reported.
    package = tmp_path / "surfcheck"
    (package / "geometry").mkdir(parents=True)
    (package / "geometry" / "bad.py").write_text("def f():\n    from surfcheck.grading.continuity import grade_seam\n")
    (package / "errors.py").write_text("")
    assert len(layer_violations(package)) == 1


def test_layer_table_matches_developers_md():
    text = (ROOT / "DEVELOPERS.md").read_text()
    order = re.search(r"<!-- layers: (.*?) -->", text).group(1).split()
    assert order == LAYERS
