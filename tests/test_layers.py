"""The folders show the layers: every module imports only what its layer may import.

The allowed-import matrix below is the one in DEVELOPERS.md ("Architecture"); change both
together. It is checked statically over every module of the package (imports parsed with
``ast``, relative imports resolved), and the physics core is also loaded in a fresh interpreter
to see that nothing it pulls in at run time loads an I/O, CLI or plotting library.
"""

import ast
import inspect
import subprocess
import sys
from pathlib import Path

import sweepcli
from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.models import MODELS

PACKAGE = Path(sweepcli.__file__).parent

# layer -> (sweepcli layers it may import, third-party packages it may import at module level,
# third-party packages it may import only inside functions: optional or slow to load).
# A module belongs to the longest layer name that is its name or a dotted prefix of it; the
# standard library is allowed everywhere, and a layer may always import itself.
MATRIX: dict[str, tuple[set[str], set[str], set[str]]] = {
    "sweepcli": (set(), set(), set()),  # the package root: __version__ only
    "sweepcli.schema": (set(), set(), set()),
    "sweepcli.errors": (set(), set(), set()),
    "sweepcli.expressions": ({"sweepcli.schema", "sweepcli.errors"}, {"numpy"}, set()),
    "sweepcli.physics": ({"sweepcli.schema"}, {"numpy", "scipy"}, set()),
    "sweepcli.jobfile": ({"sweepcli", "sweepcli.physics", "sweepcli.expressions",
                          "sweepcli.schema", "sweepcli.errors"}, {"numpy", "tomli_w"}, set()),
    "sweepcli.store": ({"sweepcli", "sweepcli.schema", "sweepcli.errors"}, {"h5py", "numpy"},
                       set()),
    "sweepcli.run": ({"sweepcli", "sweepcli.jobfile", "sweepcli.store", "sweepcli.physics",
                      "sweepcli.schema", "sweepcli.errors"}, {"numpy"},
                     {"joblib", "tqdm", "threadpoolctl", "dask", "distributed", "dask_jobqueue"}),
    "sweepcli.report": ({"sweepcli.store", "sweepcli.schema", "sweepcli.errors"}, {"numpy"},
                        {"matplotlib", "contourpy"}),
    # Solves one grid point's open sample for a picture, so it rebuilds the point from the job.
    "sweepcli.report.sample_data": ({"sweepcli.report", "sweepcli.store", "sweepcli.schema",
                                     "sweepcli.errors", "sweepcli.jobfile", "sweepcli.physics"},
                                    {"numpy"}, set()),
    # Draws it: matplotlib and the data of sample_data, no physics of its own.
    "sweepcli.report.sample_plot": ({"sweepcli.report", "sweepcli.report.sample_data",
                                     "sweepcli.store", "sweepcli.schema", "sweepcli.errors"},
                                    {"numpy"}, {"matplotlib"}),
    # The same for one grid point's Wilson loops (the point rebuilt by sample_data's helpers).
    "sweepcli.report.wilson_data": ({"sweepcli.report", "sweepcli.report.sample_data",
                                     "sweepcli.store", "sweepcli.schema", "sweepcli.errors",
                                     "sweepcli.jobfile", "sweepcli.physics"}, {"numpy"}, set()),
    "sweepcli.report.wilson_plot": ({"sweepcli.report", "sweepcli.report.wilson_data",
                                     "sweepcli.store", "sweepcli.schema", "sweepcli.errors"},
                                    {"numpy"}, {"matplotlib"}),
    # The cli package: its root app and the command groups registering on it.
    "sweepcli.cli": ({"sweepcli", "sweepcli.schema", "sweepcli.errors", "sweepcli.expressions",
                      "sweepcli.physics", "sweepcli.jobfile", "sweepcli.store", "sweepcli.run",
                      "sweepcli.report", "sweepcli.report.sample_data",
                      "sweepcli.report.sample_plot", "sweepcli.report.wilson_data",
                      "sweepcli.report.wilson_plot"}, {"typer"}, set()),
    "sweepcli.__main__": ({"sweepcli.cli"}, set(), set()),
}
STDLIB = set(sys.stdlib_module_names) | {"__future__"}


def layer_of(module: str) -> str | None:
    parts = module.split(".")
    for n in range(len(parts), 0, -1):
        if ".".join(parts[:n]) in MATRIX:
            return ".".join(parts[:n])
    return None


def modules() -> dict[str, Path]:
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = ("sweepcli", *path.relative_to(PACKAGE).with_suffix("").parts)
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = path
    return out


def imports(module: str, path: Path) -> list[tuple[str, bool]]:
    """``(imported module, at module level)`` for every import statement; relative imports
    resolved against ``module``'s package. ``from X import y`` yields ``X.y`` too when ``y`` is
    a submodule (``from . import boundary``), so a submodule's layer is the one checked."""
    tree = ast.parse(path.read_text(), str(path))
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    top_level = {id(n) for n in tree.body}
    # Imports inside `if TYPE_CHECKING:` or try blocks at module level still count as eager.
    for node in tree.body:
        if isinstance(node, ast.If | ast.Try):
            top_level |= {id(n) for n in ast.walk(node)}
    found = []
    for node in ast.walk(tree):
        eager = id(node) in top_level
        if isinstance(node, ast.Import):
            found += [(a.name, eager) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[: len(package.split(".")) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module
            found.append((target, eager))
            for a in node.names:
                if f"{target}.{a.name}" in modules():
                    found.append((f"{target}.{a.name}", eager))
    return found


def test_every_module_belongs_to_a_layer():
    unplaced = [m for m in modules() if layer_of(m) is None]
    assert unplaced == [], f"add these modules to MATRIX (and DEVELOPERS.md): {unplaced}"


def violations(module: str, found: list[tuple[str, bool]]) -> list[str]:
    """The imports in ``found`` (from :func:`imports`) that ``module``'s layer may not make."""
    layer = layer_of(module)
    internal, eager_ok, lazy_ok = MATRIX[layer]
    bad = []
    for target, eager in found:
        top = target.split(".")[0]
        if top == "sweepcli":
            target_layer = layer_of(target)
            if target_layer != layer and target_layer not in internal:
                bad.append(f"{module} imports {target} (layer {target_layer})")
        elif not (top in STDLIB or top in eager_ok or (top in lazy_ok and not eager)):
            where = "at module level" if eager else "in a function"
            bad.append(f"{module} imports {target} {where}")
    return bad


def test_import_matrix():
    """Every import of every module is allowed by the matrix, with no exceptions."""
    bad = [v for module, path in modules().items()
           for v in violations(module, imports(module, path))]
    assert bad == [], "\n".join(bad)


def test_matrix_checker_sees_a_violation(tmp_path):
    """The checker is not vacuous: a store module importing the physics core and a run module
    loading joblib at module level are caught, joblib inside a function is not, and relative
    imports are resolved."""
    path = tmp_path / "bad.py"
    path.write_text("import joblib\nfrom ..physics.point import Point\nfrom . import worker\n"
                    "def f():\n    import joblib\n")
    found = imports("sweepcli.run.bad", path)
    assert found == [("joblib", True), ("sweepcli.physics.point", True), ("sweepcli.run", True),
                     ("sweepcli.run.worker", True), ("joblib", False)]
    assert violations("sweepcli.run.bad", found) == [
        "sweepcli.run.bad imports joblib at module level"]
    assert violations("sweepcli.store.bad", [("sweepcli.physics.point", True), ("h5py", True)]) \
        == ["sweepcli.store.bad imports sweepcli.physics.point (layer sweepcli.physics)"]
    assert layer_of("sweepcli.physics.measurements.consistency") == "sweepcli.physics"
    assert layer_of("sweepcli.report.sample_data") == "sweepcli.report.sample_data"


def test_physics_imports_no_io_or_cli_libraries():
    code = ("import sys, sweepcli.physics.models, sweepcli.physics.measurements, "
            "sweepcli.physics.lattice\n"
            "bad = [m for m in ('h5py', 'typer', 'matplotlib', 'dask', 'joblib', 'tqdm', "
            "'tomli_w', 'sweepcli.store', 'sweepcli.cli', 'sweepcli.jobfile', 'sweepcli.run') "
            "if m in sys.modules]\n"
            "print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_registered_parameters_match_factory_signatures():
    """Docstrings and declarations do not drift from signatures: every declared parameter is a
    keyword of the factory and every keyword is declared, with the same default."""
    for family in (MODELS, MEASUREMENTS):
        for entry in family:
            sig = inspect.signature(entry.func)
            keywords = {n: p for n, p in sig.parameters.items()
                        if p.kind is inspect.Parameter.KEYWORD_ONLY}
            declared = {p.name: p for p in entry.params}
            assert set(keywords) == set(declared), entry.name
            for name, p in declared.items():
                default = keywords[name].default
                if p.required:
                    assert default is inspect.Parameter.empty, (entry.name, name)
                else:
                    assert default == p.default or (default is None and p.default is None), \
                        (entry.name, name)
            assert entry.func.__doc__, entry.name
            assert entry.source and entry.description, entry.name
