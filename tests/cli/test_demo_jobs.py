"""Every demo job in jobs/ validates (they are run by hand; see README for their times)."""

import pytest
from typer.testing import CliRunner

from sweepcli.cli import app

from ..conftest import JOBS


@pytest.mark.parametrize("job", sorted(p.name for p in JOBS.glob("*.toml")))
def test_demo_job_validates(job):
    result = CliRunner().invoke(app, ["check", str(JOBS / job)])
    assert result.exit_code == 0, result.output
    assert "grid:" in result.stdout
