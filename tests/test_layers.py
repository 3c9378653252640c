"""Layers that hold: the import contracts in pyproject.toml, checked by import-linter.

The handbook's layer order (lowest first: errors/columns/_io/_progress -> session ->
imagery -> environment -> model -> routes -> network -> report -> demo -> cli) is a
``layers`` contract and "no import cycles" an ``acyclic_siblings`` contract; ``lint-imports``
fails on a broken one, so a future upward import or cycle fails the suite.
"""

from __future__ import annotations

import ast
import os
import subprocess
import sys
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "walkcomfort"
LINT = "import sys; from importlinter.cli import lint_imports_command; sys.exit(lint_imports_command())"

#: Private names still imported from another module, in code other stages own (the physics
#: modules' shared internals). Shrink it; never grow it.
KNOWN_PRIVATE_IMPORTS = {
    ("walkcomfort.environment.shade", "walkcomfort.environment.scene", "_prepare"),
    ("walkcomfort.environment.skyview", "walkcomfort.environment.shade", "_EMPTY"),
    ("walkcomfort.environment.skyview", "walkcomfort.environment.shade", "_arr"),
    ("walkcomfort.environment.skyview", "walkcomfort.environment.shade", "_obstacles"),
}


def _lint_imports(cwd: Path, pythonpath: Path) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(pythonpath), os.environ.get("PYTHONPATH", "")])}
    return subprocess.run([sys.executable, "-c", LINT, "--no-cache", "--no-logo"], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=300)


def test_the_import_contracts_are_kept():
    proc = _lint_imports(ROOT, ROOT)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "0 broken" in proc.stdout


def test_a_broken_contract_fails_the_check(tmp_path):
    # a throwaway package whose low layer imports its high one: the same check must fail on it
    pkg = tmp_path / "layered"
    (pkg / "low").mkdir(parents=True)
    (pkg / "high").mkdir()
    for f in ("__init__.py", "low/__init__.py", "high/__init__.py", "high/view.py"):
        (pkg / f).write_text("")
    (pkg / "low" / "calc.py").write_text("from layered.high import view\n")
    (tmp_path / "pyproject.toml").write_text(
        '[tool.importlinter]\nroot_package = "layered"\n\n[[tool.importlinter.contracts]]\n'
        'name = "layers"\ntype = "layers"\ncontainers = ["layered"]\nlayers = ["high", "low"]\n')
    proc = _lint_imports(tmp_path, tmp_path)
    assert proc.returncode != 0 and "BROKEN" in proc.stdout and "layered.low.calc -> layered.high" in proc.stdout


def test_the_layers_contract_names_every_top_level_module():
    config = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["importlinter"]
    layers = next(c for c in config["contracts"] if c["type"] == "layers")["layers"]
    named = {m.strip() for layer in layers for m in layer.replace("|", ":").split(":")}
    present = {p.stem for p in PACKAGE.glob("*.py") if p.stem != "__init__"}
    present |= {p.name for p in PACKAGE.iterdir() if (p / "__init__.py").is_file()}
    assert named == present  # a new top-level module must be placed in a layer


def _module_name(path: Path) -> str:
    parts = path.relative_to(ROOT).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _is_module(name: str) -> bool:
    p = ROOT.joinpath(*name.split("."))
    return p.with_suffix(".py").is_file() or (p / "__init__.py").is_file()


def test_no_private_name_is_imported_from_another_module():
    found = set()
    for path in sorted(PACKAGE.rglob("*.py")):
        here = _module_name(path)
        for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
            if not isinstance(node, ast.ImportFrom) or not (node.module or "").startswith("walkcomfort"):
                continue
            for alias in node.names:
                name = alias.name
                private = name.startswith("_") and not name.startswith("__")
                if private and node.module != here and not _is_module(f"{node.module}.{name}"):
                    found.add((here, node.module, name))
    # a shared name is made public where it is defined (RULES: no `_private` names across modules)
    assert found <= KNOWN_PRIVATE_IMPORTS, sorted(found - KNOWN_PRIVATE_IMPORTS)


def test_the_demo_runs_the_clis_own_verbs_without_importing_the_cli():
    from walkcomfort.cli import VERBS
    from walkcomfort.demo.pipeline import STAGE_COMMANDS

    for verb, (module, attr) in STAGE_COMMANDS.items():
        assert VERBS[verb][:2] == (module, attr), verb
