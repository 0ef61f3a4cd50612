"""Predicted transition lines of a drive: where U(k*) at high-symmetry momenta has eigenvalue
+1 or -1, found between grid values by root finding, stored in the file and drawn by map."""

import numpy as np
from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.store import Results

JOB = """
[model]
name = "ssh"
[sweep]
omega = { start = 0.6, stop = 2.0, num = 15 }
[drive]
kind = "steps"
omega = "omega"
[[drive.step]]
span = 0.5
set = { v = 0.5, w = 0 }
[[drive.step]]
span = 0.5
set = { v = 0, w = 1.0 }
[measure.quasienergy_gaps]
[predict]
[output]
path = "OUT"
"""


def test_predicted_closings_of_the_two_step_chain(tmp_path):
    # Analytic (derived in tests/cli/test_driven_jobs.py): at k = 0, U = exp(-i (th1 + th2) s_x)
    # with th1 + th2 = (v + w) T / 2 = pi (v + w) / omega: eigenvalue -1 at omega = v + w = 1.5,
    # eigenvalue +1 at omega = (v + w) / 2 = 0.75. At k = pi, U = exp(-i (th1 - th2) s_x): its
    # crossings (omega = |v - w| = 0.5 for pi, none for 0 with v != w) lie outside the range.
    job = tmp_path / "job.toml"
    out = tmp_path / "p.h5"
    job.write_text(JOB.replace("OUT", str(out)))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 0, result.output
    t = Results.read(out).tables["transitions"]
    found = sorted((str(g), round(float(w), 9), float(k)) for g, w, k in
                   zip(t["gap"], t["omega"], t["k1"]))
    assert found == [("0", 0.75, 0.0), ("pi", 1.5, 0.0)]
    # The computed gap closes where predicted: gap_pi is smallest at the grid value 1.5.
    r = Results.read(out)
    assert r.axis("omega").values[np.argmin(r.data["gap_pi"])] == 1.5
    png = tmp_path / "p.png"
    assert CliRunner().invoke(app, ["map", str(out), "--var", "gap_pi", "-o",
                                    str(png)]).exit_code == 0
    assert png.stat().st_size > 10_000


def test_merged_shards_get_the_predicted_transitions_of_a_full_run(tmp_path):
    from .test_end_to_end import assert_same_content

    job = tmp_path / "job.toml"
    job.write_text(JOB.replace("OUT", str(tmp_path / "full.h5")))
    runner = CliRunner()
    assert runner.invoke(app, ["run", str(job), "--no-progress"]).exit_code == 0
    shards = []
    for i in (1, 2):
        assert runner.invoke(app, ["run", str(job), "--shard", f"{i}/2",
                                   "--no-progress"]).exit_code == 0
        shards.append(str(tmp_path / f"full.shard-{i}-of-2.h5"))
        assert "transitions" not in Results.read(shards[-1]).tables
    result = runner.invoke(app, ["merge", str(tmp_path / "merged.h5"), *shards])
    assert result.exit_code == 0, result.output
    assert_same_content(tmp_path / "merged.h5", tmp_path / "full.h5")
    a = Results.read(tmp_path / "merged.h5").tables["transitions"]
    b = Results.read(tmp_path / "full.h5").tables["transitions"]
    assert a.keys() == b.keys() and all(np.array_equal(a[c], b[c]) for c in a)


def test_static_qwz_predicted_closings_at_the_published_masses(tmp_path):
    # Qi, Wu and Zhang, PRB 74, 085308 (2006); Asboth et al. (2016), ch. 6: H(k) has a zero
    # eigenvalue at Gamma for m = -2t, at X and Y for m = 0, at M for m = +2t. Grid values chosen
    # so that m = 0 lies on the grid and +-2 between grid values.
    job = tmp_path / "qwz.toml"
    out = tmp_path / "q.h5"
    job.write_text(f"""
[model]
name = "qwz"
[sweep]
m = [-2.9, -2.3, -1.7, -0.4, 0.0, 0.6, 1.9, 2.2, 2.8]
[measure.gap]
[predict]
[output]
path = "{out}"
""")
    assert CliRunner().invoke(app, ["run", str(job), "--no-progress"]).exit_code == 0
    t = Results.read(out).tables["transitions"]
    found = sorted({(round(float(m), 9), round(float(k1), 3), round(float(k2), 3))
                    for m, k1, k2 in zip(t["m"], t["k1"], t["k2"])})
    assert found == [(-2.0, 0.0, 0.0), (0.0, 0.0, 0.5), (0.0, 0.5, 0.0), (2.0, 0.5, 0.5)]
    assert set(t["gap"]) == {"0"}
