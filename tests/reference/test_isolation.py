"""The pricing core never imports ``stopline.reference``.

The reference methods are independent only if the finite-difference core cannot reach them:
a check of the core against a tree is worthless if the core called the tree. Everything
outside ``reference/`` and the validation harness (``validation.py``,
``validation_report.py``) is core here, including the CLI, cross-check and batch modules.
"""

from __future__ import annotations

import ast
import os
import subprocess
import sys
from pathlib import Path

import stopline

PACKAGE_DIR = Path(stopline.__file__).resolve().parent
SRC_DIR = PACKAGE_DIR.parent
REFERENCE = "stopline.reference"
HARNESS = ("validation.py", "validation_report.py")


def _module_name(path: Path) -> str:
    rel = path.relative_to(SRC_DIR).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _is_reference(name: str) -> bool:
    return name == REFERENCE or name.startswith(REFERENCE + ".")


def reference_imports(path: Path) -> list[str]:
    """Every import of ``stopline.reference`` in one file of the package."""
    return scan(path.read_text(encoding="utf-8"), _module_name(path), path.name == "__init__.py")


def scan(code: str, module: str, is_package: bool = False) -> list[str]:
    """Every import of ``stopline.reference`` in ``code``, at any depth (functions too).

    ``module`` is the dotted name of the file; relative imports are resolved against its
    package. ``importlib.import_module`` and ``__import__`` calls with a literal name count
    as imports.
    """
    package = module if is_package else module.rpartition(".")[0]
    found: list[str] = []
    for node in ast.walk(ast.parse(code)):
        if isinstance(node, ast.Import):
            found += [a.name for a in node.names if _is_reference(a.name)]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if _is_reference(target):
                found.append(target)
            else:
                found += [f"{target}.{a.name}" for a in node.names
                          if _is_reference(f"{target}.{a.name}")]
        elif isinstance(node, ast.Call):
            func = node.func
            fname = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", "")
            if fname in ("import_module", "__import__") and node.args:
                arg = node.args[0]
                if isinstance(arg, ast.Constant) and isinstance(arg.value, str):
                    if _is_reference(arg.value) or arg.value.startswith(".reference"):
                        found.append(arg.value)
    return found


def core_files() -> list[Path]:
    """Every Python file of the package outside ``reference/`` and the harness."""
    out = []
    for path in sorted(PACKAGE_DIR.rglob("*.py")):
        rel = path.relative_to(PACKAGE_DIR)
        if rel.parts[0] == "reference" or rel.name in HARNESS:
            continue
        out.append(path)
    return out


def test_scanner_finds_the_harness_imports() -> None:
    # The scan can fail: the validation harness does import the reference methods, both at
    # module level and inside functions, relatively ("from .reference.trees import ...").
    found = reference_imports(PACKAGE_DIR / "validation.py")
    assert "stopline.reference.trees" in found
    assert "stopline.reference.closed_form" in found


def test_scanner_resolves_every_import_form() -> None:
    # Common practice: each spelling of the same import is caught, and other imports are not.
    samples = [
        ("stopline.pricing", "from .reference import bsm\n"),
        ("stopline.cli.price", "def f():\n    from ..reference.trees import crr_price\n"),
        ("stopline.pricing", "from . import reference\n"),
        ("stopline.pricing", "import stopline.reference.rgw as r\n"),
        ("stopline.pricing", "from stopline import reference\n"),
        ("stopline.pricing", "import importlib\nm = importlib.import_module('stopline.reference')\n"),
    ]
    for module, code in samples:
        assert scan(code, module), (module, code)
    assert scan("from .trees import crr_price\n", "stopline.reference", is_package=True)
    assert not scan("from .pricing import price\nfrom . import grid\n", "stopline.batch")
    assert not scan("from ..pricing import price\n", "stopline.cli.price")


def test_core_never_imports_reference() -> None:
    # The rule: the pricing core never imports stopline.reference.
    files = core_files()
    names = {p.relative_to(PACKAGE_DIR).as_posix() for p in files}
    assert {"pricing.py", "solve.py", "_kernels.py", "crosscheck.py", "cli/__init__.py"} <= names
    offenders = {p.relative_to(PACKAGE_DIR).as_posix(): reference_imports(p) for p in files}
    assert {k: v for k, v in offenders.items() if v} == {}


def test_importing_and_pricing_leaves_reference_unloaded() -> None:
    # At run time too: import every core module and price an American and a European option
    # in a fresh interpreter; stopline.reference must not be loaded.
    modules = sorted(_module_name(p) for p in core_files())
    code = (
        "import importlib, sys\n"
        f"for m in {modules!r}:\n"
        "    importlib.import_module(m)\n"
        "from stopline import Market, Option, price, implied_vol\n"
        "mkt = Market(100.0, 0.05, 0.3, 0.02)\n"
        "a = price(Option('put', 100.0, 1.0), mkt, accuracy='fast')\n"
        "e = price(Option('call', 100.0, 1.0, 'european'), mkt, accuracy='fast')\n"
        "implied_vol(Option('put', 100.0, 1.0), mkt, a.price, accuracy='fast')\n"
        "loaded = sorted(m for m in sys.modules if m.startswith('stopline.reference'))\n"
        "print('LOADED', loaded)\n"
    )
    env = dict(os.environ)
    env["PYTHONPATH"] = str(SRC_DIR) + os.pathsep + env.get("PYTHONPATH", "")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         env=env, timeout=300, check=False)
    assert out.returncode == 0, out.stderr
    assert "LOADED []" in out.stdout, out.stdout
