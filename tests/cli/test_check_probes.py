"""`check` bounds the time of its open-sample probes and says when its estimate is a lower bound."""

from typer.testing import CliRunner

from sweepcli.cli import app

from ..conftest import MASS_DRIVE

# A driven corner count on 16 x 16 flakes (our own mass drive) takes seconds per point, far
# longer than the 0.1 s budget given below.
JOB = MASS_DRIVE + """
[sweep]
omega = { start = 3.0, stop = 6.0, num = 4 }
[measure.corner_modes]
size = 16
max_size = 16
"""


def test_check_stops_a_long_probe_and_says_the_estimate_is_a_lower_bound(tmp_path):
    path = tmp_path / "job.toml"
    path.write_text(JOB)
    result = CliRunner().invoke(app, ["check", str(path), "--probe-seconds", "0.1"])
    assert result.exit_code == 0, result.output
    line = next(x for x in result.stdout.splitlines() if x.startswith("cost estimate:"))
    assert "the probe of corner_modes was stopped after 0.1 s" in line
    assert "lower bounds" in line
