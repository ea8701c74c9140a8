"""The package's shape: imports go one way down the data path, and only ``leverage.cli``
knows the command line (argv, exit codes, stderr wording).

No outside source: these check our own contract (pyproject.toml's import-linter
contracts, also run by .ci/run as ``lint-imports``), by walking every module's imports.
"""

import ast
from pathlib import Path

import tomli

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "leverage"


def module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def imported_modules(path: Path) -> set:
    """Absolute names of the leverage modules a file imports (relative ones resolved)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    here = module_name(path).split(".")
    package = here if path.name == "__init__.py" else here[:-1]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found |= {a.name for a in node.names if a.name.startswith("leverage")}
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                name = ".".join(base + ([node.module] if node.module else []))
            else:
                name = node.module or ""
            if name.startswith("leverage"):
                found.add(name)
                found |= {f"{name}.{a.name}" for a in node.names}
    return found


def layer_of(module: str, layers: list) -> int | None:
    for rank, layer in enumerate(layers):
        for member in (m.strip() for m in layer.split("|")):
            if module == member or module.startswith(member + "."):
                return rank
    return None


def contracts() -> list:
    return tomli.loads((ROOT / "pyproject.toml").read_text())["tool"]["importlinter"]["contracts"]


def test_layers_import_only_downward():
    layers = next(c for c in contracts() if c["type"] == "layers")["layers"]
    assert layers[0] == "leverage.cli" and layers[-1] == "leverage.core"
    broken = []
    for path in PACKAGE.rglob("*.py"):
        here = layer_of(module_name(path), layers)
        if here is None:
            continue
        for target in imported_modules(path):
            there = layer_of(target, layers)
            if there is not None and there < here:
                broken.append(f"{module_name(path)} -> {target}")
    assert not broken, broken


def test_every_subpackage_is_in_a_layer():
    layers = next(c for c in contracts() if c["type"] == "layers")["layers"]
    for path in PACKAGE.glob("*"):
        if path.name.startswith("_") or path.name in ("__pycache__",) or path.suffix == ".pyc":
            continue
        name = module_name(path / "__init__.py") if path.is_dir() else module_name(path)
        assert layer_of(name, layers) is not None, f"{name} is in no layer of pyproject.toml"


def test_core_imports_nothing_above_it():
    for path in (PACKAGE / "core").rglob("*.py"):
        above = {m for m in imported_modules(path) if not m.startswith("leverage.core")}
        assert not above, f"{path.name} imports {above}"


def test_only_the_command_line_knows_argv_exit_codes_and_stderr():
    for path in PACKAGE.rglob("*.py"):
        name = module_name(path)
        if name.startswith("leverage.cli") or name == "leverage.__main__":
            continue
        text = path.read_text(encoding="utf-8")
        for word in ("sys.argv", "sys.exit", "argparse", "EXIT_"):
            assert word not in text, f"{name} mentions {word}"
