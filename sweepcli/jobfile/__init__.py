"""Job files: TOML parsing, validation against the registries, normalisation and hashing.

A job file has the tables ``[job]``, ``[model]``, ``[params]``, ``[sweep]``, ``[drive]``,
``[measure]``, ``[confirm]`` and ``[output]`` (see README.md). :func:`load_job` checks the whole
file once and returns a frozen :class:`Job`; every error names the file, the table and key, what
was expected and what was given. Job files are data: expressions are parsed by
:mod:`sweepcli.expressions`.
"""

from .load import build_job, load_job, output_path_problem, read_toml
from .spec import Axis, Confirm, CustomModel, DriveSpec, Job, Refine
from .stored import job_from_results

__all__ = ["Axis", "Confirm", "CustomModel", "DriveSpec", "Job", "Refine", "build_job",
           "job_from_results", "load_job", "output_path_problem", "read_toml"]
