"""The layers: imports only go downward (solvers <- surrogates <- suite)."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
FORBIDDEN = {"solvers": {"surrogates", "suite"}, "surrogates": {"suite"}}


def _imported_top_levels(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(), filename=str(path))
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names.add(node.module.split(".")[0])
    return names


@pytest.mark.parametrize("package", sorted(FORBIDDEN))
def test_no_upward_imports(package):
    offenders = []
    for path in sorted((ROOT / package).rglob("*.py")):
        bad = _imported_top_levels(path) & FORBIDDEN[package]
        if bad:
            offenders.append(f"{path.relative_to(ROOT)} imports {sorted(bad)}")
    assert not offenders, "; ".join(offenders)


def test_the_check_sees_imports(tmp_path):
    # the checker itself must be able to fail (a test that cannot fail is a defect)
    p = tmp_path / "m.py"
    p.write_text("import os\nfrom suite.systems import get_system\n")
    assert "suite" in _imported_top_levels(p)
