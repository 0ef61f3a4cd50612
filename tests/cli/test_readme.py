"""The README's examples work as written."""

import re

from typer.testing import CliRunner

from sweepcli.cli import app
from sweepcli.store import Results

from ..conftest import ROOT


def blocks(lang):
    text = (ROOT / "README.md").read_text()
    return re.findall(rf"```{lang}\n(.*?)```", text, flags=re.S)


def test_ci_runs_the_readme_test_command():
    commands = [b.strip() for b in blocks("bash")]
    assert commands[1] in (ROOT / ".ci" / "run").read_text()
    assert "jobs/quickstart.toml" in commands[0] and "sweepcli map" in commands[0]


def test_readme_job_files_validate(tmp_path):
    models = [b for b in blocks("toml") if "[model]" in b]
    example = next(b for b in models if "[job]" in b)
    custom = next(b for b in models if 'name = "custom"' in b)
    job = tmp_path / "example.toml"
    job.write_text(example)
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 0, result.output
    assert "grid: 41 x 31 = 1271 points" in result.stdout

    job = tmp_path / "custom.toml"
    m = [-3.0, -1.5, -0.5, 0.5, 1.5, 3.0]
    job.write_text(custom + f'[params]\nt = 1.0\n[sweep]\nm = {m}\n[measure.gap]\n'
                   f'[measure.chern]\n[output]\npath = "{tmp_path / "c.h5"}"\n')
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 0, result.output
    # Qi, Wu and Zhang, PRB 74, 085308 (2006): |C| = 1 for 0 < |m| < 2t, 0 for |m| > 2t.
    chern = Results.read(tmp_path / "c.h5").data["chern"]
    assert [abs(int(c)) for c in chern] == [0, 1, 1, 1, 1, 0]

    refine = next(b for b in blocks("toml") if "[refine]" in b)
    job = tmp_path / "refined.toml"
    job.write_text(example + refine)
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 0, result.output
    assert "grid: 321 x 241 = 77361 points" in result.stdout


def test_readme_drive_examples_validate(tmp_path):
    steps = next(b for b in blocks("toml") if 'kind = "steps"' in b)
    harmonic = next(b for b in blocks("toml") if 'kind = "harmonic"' in b)
    out = f'[output]\npath = "{tmp_path / "d.h5"}"\n'
    cases = [
        ('[model]\nname = "bhz_corner"\n[params]\ndelta2 = 0.6\n[sweep]\nratio = [0.0, 1.0]\n'
         'T = [1.0]\n[measure.quasienergy_gaps]\n' + steps, "grid: 2 x 1 = 2 points"),
        ('[model]\nname = "qwz"\n[params]\nm = 1.0\n[sweep]\nA = [0.1]\nomega = [10.0]\n'
         '[measure.quasienergy_gaps]\n' + harmonic, "grid: 1 x 1 = 1 points"),
    ]
    for text, grid in cases:
        job = tmp_path / "drive.toml"
        job.write_text(text + out)
        result = CliRunner().invoke(app, ["check", str(job)])
        assert result.exit_code == 0, result.output
        assert grid in result.stdout


def test_readme_shows_the_quickstart_map():
    text = (ROOT / "README.md").read_text()
    images = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", text)
    assert images == ["docs/quickstart-map.png"]
    png = ROOT / images[0]
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size < 200_000
