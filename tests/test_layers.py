"""The engine stays free of web, storage and cluster imports (STYLE sec. 1)."""

import ast
from pathlib import Path

import pytest

ENGINE = Path(__file__).resolve().parent.parent / "service" / "engine"
FORBIDDEN = {"flask", "werkzeug", "sqlite3", "pyarrow", "dask", "distributed", "service.api",
             "service.store", "service.batch"}


def _imports(path: Path):
    tree = ast.parse(path.read_text(), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            yield node.module


@pytest.mark.parametrize("path", sorted(ENGINE.glob("*.py")), ids=lambda p: p.name)
def test_engine_module_imports_nothing_outside_its_layer(path):
    _check(path, FORBIDDEN)


def _check(path: Path, forbidden) -> None:
    bad = [m for m in _imports(path)
           if any(m == f or m.startswith(f + ".") for f in forbidden)]
    assert not bad, f"{path.name} imports {bad}"


def test_engine_public_names_exist():
    import service.engine as engine
    for name in engine.__all__:
        assert hasattr(engine, name), name


STORE = ENGINE.parent / "store"
STORE_FORBIDDEN = {"flask", "werkzeug", "service.api", "dask", "distributed"}


@pytest.mark.parametrize("path", sorted(STORE.glob("*.py")), ids=lambda p: p.name)
def test_store_never_touches_requests(path):
    _check(path, STORE_FORBIDDEN)


def test_importing_the_engine_does_not_load_flask():
    import subprocess
    import sys

    code = "import sys, service.engine, service.client; print('flask' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120, check=True)
    assert out.stdout.strip() == "False"



BATCH = ENGINE.parent / "batch"
BATCH_FORBIDDEN = {"flask", "werkzeug", "service.api"}


@pytest.mark.parametrize("path", sorted(BATCH.glob("*.py")), ids=lambda p: p.name)
def test_batch_never_touches_the_web_layer(path):
    # Dask graphs are built from engine functions; the API calls batch, never
    # the other way round (STYLE sec. 1).
    _check(path, BATCH_FORBIDDEN)
