"""Results files follow the CF conventions they declare: every coordinate and variable has
units that UDUNITS parses, a quantity in units of the model's energy is a pure number ("1")
with its scale in long_name, and the reason links survive. No physics runs here: the layout of
every demo job is written as it is before the first point."""

import h5py
import pytest

from sweepcli.jobfile import load_job
from sweepcli.run.layout import results_for_job

from ..conftest import JOBS

# Units strings UDUNITS-2 parses with the meaning meant here (from memory of its unit
# database): the pure number "1", radians and seconds. "energy" and "t" are not among them ("t"
# is the tonne there) and neither is "1/a" ("a" is the are, 100 m^2).
PARSEABLE = {"1", "rad", "s"}


@pytest.mark.parametrize("name", sorted(p.name for p in JOBS.glob("*.toml")))
def test_demo_layouts_are_cf(name, tmp_path):
    r = results_for_job(load_job(JOBS / name))
    path = tmp_path / "r.h5"
    r.write(path)
    with h5py.File(path) as f:
        assert f.attrs["Conventions"] == "CF-1.10"
        names = [a.name for a in r.axes] + list(r.variables) + ["done"]
        for n in names:
            assert f[n].attrs["units"] in PARSEABLE, (name, n, f[n].attrs["units"])
        for n, v in r.variables.items():
            assert f[n].attrs.get("ancillary_variables", "") == " ".join(v.ancillary), n
            for link in v.ancillary:
                assert link in f, (n, link)
    energies = [v for n, v in r.variables.items() if n in ("gap", "gap_0", "gap_pi")]
    for v in energies:
        assert "in units of the model's energy scale" in v.long_name


def test_model_parameter_axes_name_their_scale(write_job):
    job = load_job(write_job('[model]\nname = "qwz"\n[sweep]\nm = [0, 1]\nt = [1, 2]\n'
                             '[measure.gap]\n'))
    m, t = results_for_job(job).axes
    assert (m.units, m.long_name) == ("1", "staggered mass u (in units of the hopping t)")
    assert (t.units, t.long_name) == ("1", "hopping (in units of the model's energy scale)")
