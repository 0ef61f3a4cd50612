"""A results file with a huge title (a hand-edited or hostile file): show and map print its
beginning and say that it was truncated, instead of printing it all or wrapping it for
minutes."""

import h5py
from typer.testing import CliRunner

from sweepcli.cli import app

JOB = """
[model]
name = "qwz"
[sweep]
m = { start = -3.0, stop = 3.0, num = 3 }
t = [0.5, 1.0]
[measure.gap]
[output]
path = "OUT"
"""


def test_long_title_is_truncated_in_show_and_map(tmp_path):
    job = tmp_path / "job.toml"
    out = tmp_path / "out.h5"
    job.write_text(JOB.replace("OUT", str(out)))
    assert CliRunner().invoke(app, ["run", str(job), "--no-progress"]).exit_code == 0
    title = "T" * 2_000_000
    with h5py.File(out, "a") as f:
        f.attrs["title"] = title
    shown = CliRunner().invoke(app, ["show", str(out)])
    assert shown.exit_code == 0, shown.output
    assert len(shown.stdout) < 20_000
    assert "T" * 300 + "... [truncated: 2,000,000 characters in all]" in shown.stdout
    assert "T" * 301 not in shown.stdout
    term = CliRunner().invoke(app, ["map", str(out), "--terminal", "--width", "60"])
    assert term.exit_code == 0, term.output
    assert "[truncated: 2,000,000 characters in all]" in term.stdout
    assert len(term.stdout) < 20_000
    png = CliRunner().invoke(app, ["map", str(out), "-o", str(tmp_path / "map.png")])
    assert png.exit_code == 0, png.output
    assert (tmp_path / "map.png").stat().st_size > 0
