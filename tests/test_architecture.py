"""Import contracts: the layers of docs/ARCHITECTURE.md, checked by parsing the sources.

Every ``import``/``from ... import`` in the package (module level and inside functions) is
read with :mod:`ast`.  A package may import only from packages of a lower layer (or from
itself); packages of the same layer do not import each other, so there are no cycles; the
numpy layer never imports xarray, pandas, dask or matplotlib; only ``cohort`` imports dask
and only ``viz`` imports matplotlib.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "tfhrv"

#: package (first component below tfhrv) -> layer; lower layers never import higher ones.
LAYERS: dict[str, int] = {
    "core": 0,
    "signal": 1,
    "io": 2,
    "estimators": 2,
    "stationarity": 2,
    "synth": 2,
    "calibration": 3,
    "analysis": 4,
    "dataset": 5,
    "circadian": 6,
    "viz": 7,
    "cohort": 8,
    "cli": 9,
}
NUMPY_LAYER = ("core", "signal", "io", "estimators", "stationarity", "synth", "calibration",
               "analysis")
LABELLED = ("xarray", "pandas", "dask", "distributed", "matplotlib")


def _unit(path: Path) -> str:
    rel = path.relative_to(PACKAGE).with_suffix("")
    return rel.parts[0] if len(rel.parts) > 1 else rel.parts[0]


def _imports(path: Path) -> list[tuple[int, str]]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            out.append((node.lineno, node.module))
            if node.module == "tfhrv":
                out += [(node.lineno, f"tfhrv.{a.name}") for a in node.names]
    return out


def _sources() -> list[Path]:
    return sorted(p for p in PACKAGE.rglob("*.py")
                  if p.name not in ("__main__.py",) and p.parent != PACKAGE or
                  p.name == "cli.py")


def test_every_package_has_a_layer():
    # Adding a package means deciding its layer here and in docs/ARCHITECTURE.md.
    units = {_unit(p) for p in PACKAGE.rglob("*.py") if p.parent != PACKAGE}
    assert units <= set(LAYERS), sorted(units - set(LAYERS))


@pytest.mark.parametrize("path", _sources(), ids=lambda p: str(p.relative_to(PACKAGE)))
def test_layer_direction(path: Path):
    unit = _unit(path)
    bad = []
    for line, module in _imports(path):
        parts = module.split(".")
        if parts[0] == "tfhrv" and len(parts) > 1 and parts[1] in LAYERS:
            target = parts[1]
            if target != unit and LAYERS[target] >= LAYERS[unit]:
                bad.append(f"line {line}: {unit} (layer {LAYERS[unit]}) imports {module} "
                           f"(layer {LAYERS[target]})")
        if unit in NUMPY_LAYER and parts[0] in LABELLED:
            bad.append(f"line {line}: numpy-layer {unit} imports {module}")
        if parts[0] in ("dask", "distributed") and unit != "cohort":
            bad.append(f"line {line}: only cohort may import {module}")
        if parts[0] == "matplotlib" and unit != "viz":
            bad.append(f"line {line}: only viz may import {module}")
        if parts[0] == "argparse" and unit != "cli":
            bad.append(f"line {line}: argument parsing belongs in cli ({module})")
    assert not bad, "\n".join(bad)


def test_root_modules_are_only_the_entry_points():
    root = sorted(p.name for p in PACKAGE.glob("*.py"))
    assert root == ["__init__.py", "__main__.py", "cli.py"]


def test_checker_sees_a_violation(tmp_path):
    # The checker itself must be able to fail: an upward import is found.
    bad = tmp_path / "x.py"
    bad.write_text("def f():\n    from tfhrv.viz.figures import save_all\n")
    assert _imports(bad) == [(2, "tfhrv.viz.figures")]
