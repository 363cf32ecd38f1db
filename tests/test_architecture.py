"""The architecture rules of DEVELOPERS.md, checked on the source files themselves.

- No import cycle among the modules of ``models/`` and ``service/``.
- ``models/`` never imports ``service`` or an HTTP framework.
- Only ``models/fitting/`` imports PyMC, PyTensor or ArviZ.
- Answering a forecast (through ``models.prediction`` or ``service.queries.forecast``) leaves
  PyMC, PyTensor and ArviZ out of ``sys.modules``, checked in a fresh interpreter.

The import graph is read with :mod:`ast` from every ``.py`` file, so imports inside functions and
under ``if TYPE_CHECKING:`` count too (a type-only import still ties two modules together).
Imports by string (``importlib.import_module(name)``) are not seen.
"""

from __future__ import annotations

import ast
import json
import os
import subprocess
import sys
import textwrap
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from models.store import FileStore
from tests.conftest import synthetic_posterior

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("models", "service")
HTTP = {"service", "fastapi", "starlette", "uvicorn", "httpx", "requests", "aiohttp"}
SAMPLER = {"pymc", "pytensor", "arviz", "nutpie"}


@dataclass(frozen=True)
class Import:
    """One import statement's target, as a dotted module name, and where it was written."""

    target: str
    line: int


def module_files(root: Path, packages: Iterable[str]) -> dict[str, Path]:
    """Dotted module name -> file, for every ``.py`` file under the packages."""
    found = {}
    for package in packages:
        for path in sorted((root / package).rglob("*.py")):
            parts = list(path.relative_to(root).with_suffix("").parts)
            if parts[-1] == "__init__":
                parts.pop()
            found[".".join(parts)] = path
    return found


def imports_of(name: str, path: Path) -> Iterator[Import]:
    """Every module an import statement in ``path`` names (absolute, relative, nested)."""
    is_package = path.name == "__init__.py"
    package = name if is_package else name.rpartition(".")[0]
    for node in ast.walk(ast.parse(path.read_text(), filename=str(path))):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield Import(alias.name, node.lineno)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                stem = ".".join([*base, node.module] if node.module else base)
            else:
                stem = node.module or ""
            for alias in node.names:
                # ``from a.b import c``: c may be a submodule or a name defined in a.b;
                # :func:`resolve` takes the submodule if there is one, else a.b.
                yield Import(f"{stem}.{alias.name}", node.lineno)


def resolve(target: str, modules: dict[str, Path]) -> str | None:
    """The longest known module that ``target`` names (None for third-party modules)."""
    parts = target.split(".")
    while parts:
        candidate = ".".join(parts)
        if candidate in modules:
            return candidate
        parts.pop()
    return None


def import_graph(modules: dict[str, Path]) -> dict[str, set[str]]:
    """Module -> the project modules importing it executes.

    Importing ``a.b.c`` also runs the ``__init__`` of ``a`` and ``a.b``; that edge is kept,
    except to the importer's own enclosing packages, which are already being imported when
    their submodules run (so a package ``__init__`` importing its own submodules is no cycle).
    """
    graph: dict[str, set[str]] = {name: set() for name in modules}
    for name, path in modules.items():
        own = {".".join(name.split(".")[:k]) for k in range(1, name.count(".") + 2)}
        if path.name != "__init__.py":
            own.discard(name)
        for item in imports_of(name, path):
            found = resolve(item.target, modules)
            if found is None:
                continue
            parts = found.split(".")
            for k in range(1, len(parts) + 1):
                step = ".".join(parts[:k])
                if step != name and (step == found or step not in own):
                    graph[name].add(step)
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """One cycle through each strongly connected component of more than one module.

    Tarjan's algorithm (Tarjan, "Depth-first search and linear graph algorithms", SIAM J.
    Computing 1(2) 1972), written iteratively.
    """
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    components: list[list[str]] = []
    for start in sorted(graph):
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = len(index)
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            for child in children:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                    break
                if child in on_stack:
                    low[node] = min(low[node], index[child])
            else:
                work.pop()
                if work:
                    parent = work[-1][0]
                    low[parent] = min(low[parent], low[node])
                if low[node] == index[node]:
                    component = []
                    while True:
                        member = stack.pop()
                        on_stack.discard(member)
                        component.append(member)
                        if member == node:
                            break
                    if len(component) > 1:
                        components.append(sorted(component))
    return [_a_cycle_in(component, graph) for component in components]


def _a_cycle_in(component: list[str], graph: dict[str, set[str]]) -> list[str]:
    """A shortest path from the component's first module back to itself (breadth first)."""
    members = set(component)
    first = component[0]
    previous: dict[str, str] = {}
    frontier = [first]
    while frontier:
        following = []
        for node in frontier:
            for child in sorted(graph[node] & members):
                if child == first:
                    path = [node]
                    while path[-1] != first:
                        path.append(previous[path[-1]])
                    return [first, *reversed(path[:-1]), first]
                if child not in previous:
                    previous[child] = node
                    following.append(child)
        frontier = following
    raise AssertionError(f"no cycle through {first}")  # pragma: no cover - Tarjan found one


def inside(name: str, package: str) -> bool:
    return name == package or name.startswith(package + ".")


def forbidden_imports(
    modules: dict[str, Path],
    root: Path,
    *,
    under: str,
    names: set[str],
    allowed_under: str | None = None,
) -> list[str]:
    """``file:line imports x`` for each module under ``under`` that imports a top-level module
    named in ``names`` (modules under ``allowed_under`` excepted)."""
    found = set()
    for name, path in modules.items():
        if not inside(name, under) or (allowed_under and inside(name, allowed_under)):
            continue
        for item in imports_of(name, path):
            top = item.target.split(".")[0]
            if top in names:
                found.add(f"{path.relative_to(root).as_posix()}:{item.line} imports {top}")
    return sorted(found)


MODULES = module_files(ROOT, PACKAGES)


class TestImportGraph:
    def test_every_package_file_is_read(self) -> None:
        assert {"models.prediction.windows", "models.fitting", "service.cli.app"} <= set(MODULES)
        assert len(MODULES) == sum(len(list((ROOT / p).rglob("*.py"))) for p in PACKAGES)

    def test_no_import_cycle(self) -> None:
        found = cycles(import_graph(MODULES))
        assert not found, "import cycles:\n" + "\n".join(" -> ".join(c) for c in found)

    def test_models_never_import_service_or_http(self) -> None:
        found = forbidden_imports(MODULES, ROOT, under="models", names=HTTP)
        assert not found, "\n".join(found)

    def test_only_the_fitting_package_imports_the_sampler(self) -> None:
        for package in PACKAGES:
            found = forbidden_imports(
                MODULES, ROOT, under=package, names=SAMPLER, allowed_under="models.fitting"
            )
            assert not found, "\n".join(found)


class TestTheCheckerItself:
    """The checks above must be able to fail: a small package of our own with known faults."""

    @pytest.fixture
    def package(self, tmp_path: Path) -> dict[str, Path]:
        files = {
            "pkg/__init__.py": "from pkg.a import thing\n",  # its own submodule: no cycle
            "pkg/a.py": "import numpy\nthing = 1\n",
            "pkg/b.py": "from . import c\n",
            "pkg/c.py": "def later():\n    from pkg.d import x\n",  # function-level import
            "pkg/d.py": (
                "from typing import TYPE_CHECKING\n"
                "if TYPE_CHECKING:\n    from .b import y\n"  # type-only import
                "x = 1\n"
            ),
            "pkg/sub/__init__.py": "",
            "pkg/sub/e.py": "from ..a import thing\nimport fastapi\nimport arviz as az\n",
            "pkg/fitting/__init__.py": "",
            "pkg/fitting/f.py": "import pymc\n",
            "pkg/g.py": "import pkg.fitting.f\n",
        }
        for name, text in files.items():
            (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
            (tmp_path / name).write_text(text)
        return module_files(tmp_path, ["pkg"])

    @pytest.fixture
    def root(self, package: dict[str, Path]) -> Path:
        return package["pkg"].parents[1]

    def test_finds_the_cycle_through_function_and_type_only_imports(self, package) -> None:
        graph = import_graph(package)
        assert graph["pkg"] == {"pkg.a"}
        assert graph["pkg.sub.e"] == {"pkg.a"}  # relative import two levels up
        assert cycles(graph) == [["pkg.b", "pkg.c", "pkg.d", "pkg.b"]]

    def test_importing_a_submodule_runs_its_packages_init(self, package) -> None:
        # ``import pkg.fitting.f`` from pkg.g executes pkg/fitting/__init__.py as well.
        assert import_graph(package)["pkg.g"] == {"pkg.fitting", "pkg.fitting.f"}

    def test_finds_forbidden_imports_with_their_lines(self, package, root) -> None:
        assert forbidden_imports(package, root, under="pkg", names=HTTP) == [
            "pkg/sub/e.py:2 imports fastapi"
        ]
        assert forbidden_imports(
            package, root, under="pkg", names=SAMPLER, allowed_under="pkg.fitting"
        ) == ["pkg/sub/e.py:3 imports arviz"]


# ----------------------------------------------------------------------------- query path

PROBE = """
import json, sys
{imports}
{answer}
print(json.dumps({{"answer": answer, "loaded": sorted(m for m in {sampler!r} if m in sys.modules)}}))
"""


def run_probe(imports: str, answer: str, *, warnings: str = "error") -> dict[str, object]:
    """Run the probe in a fresh interpreter with this worktree first on the path."""
    code = PROBE.format(imports=imports, answer=textwrap.dedent(answer), sampler=sorted(SAMPLER))
    path = os.pathsep.join(p for p in (str(ROOT), os.environ.get("PYTHONPATH")) if p)
    done = subprocess.run(
        [sys.executable, "-W", warnings, "-c", code],
        capture_output=True,
        text=True,
        env={**os.environ, "PYTHONPATH": path},
        cwd=ROOT,
        timeout=300,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


@pytest.fixture(scope="module")
def synthetic_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    hours = np.arange(24)
    table = np.tile(2.0 + 8.0 * np.exp(-0.5 * ((hours - 12) / 3) ** 2), (7, 1))
    root = tmp_path_factory.mktemp("store")
    FileStore(root).publish("desk", synthetic_posterior(table, draws=50), manifest={})
    return root


class TestQueryPathLeavesTheSamplerOut:
    # Expected means: the synthetic table's rate at 12:00 is 10/h, so 10 over one hour
    # (no latent term, no trend: every draw has the table's rate).

    def test_through_the_prediction_package(self, synthetic_store: Path) -> None:
        got = run_probe(
            "import pandas as pd\nimport models.prediction as prediction\n"
            "from models.store import FileStore",
            f"""
            stored = FileStore({str(synthetic_store)!r}).load("desk")
            start = pd.DatetimeIndex([pd.Timestamp("2026-03-03T12:00", tz="America/Chicago")])
            result = prediction.forecast(stored.posterior, start, start + pd.Timedelta(hours=1),
                                         levels=(0.8,))
            answer = result.rows()[0]["mean"]
            """,
        )
        assert got["answer"] == pytest.approx(10.0, rel=1e-5)
        assert got["loaded"] == []

    def test_through_the_shared_forecast_query(self, synthetic_store: Path) -> None:
        got = run_probe(
            "from models.store import FileStore\n"
            "from service.queries.forecast import forecast_document, range_windows",
            f"""
            stored = FileStore({str(synthetic_store)!r}).load("desk")
            starts, ends = range_windows("2026-03-03T12:00", "2026-03-03T13:00", step=None,
                                         tz="America/Chicago")
            answer = forecast_document(stored, starts, ends, levels=(0.8,))["windows"][0]["mean"]
            """,
        )
        assert got["answer"] == pytest.approx(10.0, rel=1e-5)
        assert got["loaded"] == []

    def test_the_probe_sees_the_sampler_when_it_is_loaded(self) -> None:
        # The same probe after importing the sampling module: the check above can fail. (ArviZ
        # may announce its refactor at import, once a day: warnings are not the point here.)
        got = run_probe("import models.fitting.sampling", "answer = None", warnings="default")
        assert {"pymc", "pytensor", "arviz"} <= set(got["loaded"])  # type: ignore[arg-type]
