"""The results layout of a job: its axes, stored variables and job attributes.

This is where the job meets the store: the axes take their units and long names from the job
file or, failing that, from the model's declared parameters, and every measurement adds its
quantities and its reason variables: ``<measurement>_reason``, or one
``<measurement>_<group>_reason`` per gap for a measurement with reason groups
(results-schema.md). Every variable names the reason variables that explain it
(``ancillary_variables``); a bulk-boundary flag those of the variables it reads.
"""

from __future__ import annotations

import numpy as np

from ..jobfile import Job
from ..physics.measurements import reason_links, reason_names
from ..physics.models import MODELS
from ..schema import POINT_SECONDS, cf_units
from ..store import Results, Variable
from ..store.provenance import new_results
from ..store.results import AxisData

_GAP_WORDS = {"0": "quasienergy (energy) 0", "pi": "quasienergy pi/T"}


def rule_links(reads: tuple[str, ...], links: dict[str, tuple[str, ...]]) -> tuple[str, ...]:
    """The reason variables of a bulk-boundary flag: those of the variables it reads, keeping
    only the per-gap ones when some are per gap (a flag at pi reads ``line_sectors``, which
    every gap of ``line_winding`` explains, but only the pi reasons explain the flag)."""
    single = [links[n] for n in reads if len(links.get(n, ())) == 1]
    chosen = single or [links.get(n, ()) for n in reads]
    return tuple(dict.fromkeys(r for rs in chosen for r in rs))


def results_for_job(job: Job, argv: list[str] | None = None) -> Results:
    """Preallocated results for every grid point of ``job``, nothing computed yet."""
    axes = []
    for a in job.axes:
        param = MODELS[job.model].param(a.name) if job.model in MODELS else None
        units = a.units or (param.units if param is not None and param.units else "1")
        long_name = a.doc or (param.doc if param is not None and param.doc else a.name)
        units, long_name = cf_units(units, long_name)
        axes.append(AxisData(a.name, np.array(a.values), units, long_name, a.spacing))
    variables = []
    driven = job.drive.kind != "static"
    links: dict[str, tuple[str, ...]] = {}
    for measurement, quantities in job.quantities():
        links.update(reason_links(measurement, job.dim, driven))
        for q in quantities:
            variables.append(Variable(q.name, q.dtype, *cf_units(q.units, q.long_name),
                                      measurement, links[q.name]))
        for group, rname in reason_names(measurement, job.dim, driven).items():
            what = measurement + (f" at {_GAP_WORDS.get(group, group)}" if group else "")
            variables.append(Variable(rname, "uint8", "1",
                                      f"why {what} is missing (0 = not missing)", measurement))
    for rule in job.consistency_rules():
        q = rule.quantity
        variables.append(Variable(q.name, q.dtype, *cf_units(q.units, q.long_name),
                                  "consistency", rule_links(rule.reads, links)))
    variables.append(Variable(POINT_SECONDS, "float64", "s",
                              "compute time of the point in a worker (summed over passes)",
                              "run"))
    attrs = {
        "title": job.title,
        "job_name": job.name,
        "job_path": job.path,
        "job_text": job.text,
        "job_normalised": job.normalised,
        "job_sha256": job.sha256,
    }
    if job.main is not None:
        attrs["main_variable"] = job.main
    if job.refine is not None:
        attrs["refine_by"] = job.refine.by
        attrs["refine_stride"] = str(job.refine.stride)
    attrs.update(confirm_attrs(job))
    return new_results(axes, variables, attrs, argv)


def confirm_attrs(job: Job) -> dict[str, str]:
    """Root attributes of a ``[confirm]`` job: the table as TOML and the confirmed
    measurements, which reports read to tell not-requested cells from missing ones; empty
    strings for a job without the table (a resumed file then says so)."""
    c = job.confirm
    return {"confirm": c.text if c else "",
            "confirm_measurements": ",".join(c.measurements) if c else ""}
