"""The folders show the layers: the physics core imports numpy and scipy only."""

import inspect
import subprocess
import sys

from sweepcli.physics.measurements import MEASUREMENTS
from sweepcli.physics.models import MODELS


def test_physics_imports_no_io_or_cli_libraries():
    code = ("import sys, sweepcli.physics.models, sweepcli.physics.measurements, "
            "sweepcli.physics.lattice\n"
            "bad = [m for m in ('h5py', 'typer', 'matplotlib', 'dask', 'joblib', 'tqdm', "
            "'tomli_w', 'sweepcli.store', 'sweepcli.cli', 'sweepcli.jobfile') "
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
