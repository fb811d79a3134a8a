"""Data flows one way: a module imports only from modules earlier in the flow."""

import ast
import pathlib

import dfkit

# The flow, first to last (modules not yet written are listed where they belong).
ORDER = ["conventions", "policy", "cautions", "problems", "io", "coords", "grids", "magnetic", "observations",
         "geodesy", "estimators", "regions", "locate", "fixes", "calibration", "homerange", "planning", "geometry",
         "export", "figures", "maps", "reports", "season", "cli", "__init__", "__main__"]


def test_imports_flow_one_way():
    root = pathlib.Path(dfkit.__file__).parent
    checked = 0
    for path in root.rglob("*.py"):
        here = path.relative_to(root).parts[0].removesuffix(".py")
        if here not in ORDER:
            continue
        for node in ast.walk(ast.parse(path.read_text())):
            names = []
            if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("dfkit"):
                mod = node.module.split(".")
                names = [mod[1]] if len(mod) > 1 else [a.name for a in node.names]
            for there in names:
                if there in ORDER:
                    checked += 1
                    assert ORDER.index(there) <= ORDER.index(here), f"{path.name} imports {there}"
    assert checked > 10


def test_vendored_leaflet_is_the_released_file():
    # sha256 of leaflet@1.9.4 dist files as published on the npm registry (checked when vendored).
    import hashlib

    root = pathlib.Path(dfkit.__file__).parent / "_vendor" / "leaflet"
    sums = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in root.iterdir() if p.is_file()}
    assert sums["leaflet.js"] == "db49d009c841f5ca34a888c96511ae936fd9f5533e90d8b2c4d57596f4e5641a"
    assert sums["leaflet.css"] == "a7837102824184820dfa198d1ebcd109ff6d0ff9a2672a074b9a1b4d147d04c6"
    assert "BSD 2-Clause" in (root / "LICENSE").read_text()
