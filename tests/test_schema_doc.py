"""results-schema.md documents every stored quantity, reason variable and reason code of every
registered measurement."""

import re

from sweepcli.physics.measurements import (
    MEASUREMENTS,
    quantities_of,
    reason_groups_of,
    reason_names,
)
from sweepcli.schema import Reason

from .conftest import ROOT


def test_every_quantity_is_documented():
    text = (ROOT / "results-schema.md").read_text()
    missing = []
    for entry in MEASUREMENTS:
        if f"`{entry.name}`" not in text:
            missing.append(entry.name)
        drives = {None: (False, True), True: (True,), False: (False,)}[entry.extra.get("driven")]
        for dim, driven in ((d, dr) for d in entry.extra.get("dims", (1, 2)) for dr in drives):
            for q in quantities_of(entry.name, dim, driven):
                # Numbered slots (line_w0_s3) and the gaps (_0, _pi) are documented once with a
                # placeholder: line_w0_sj, corner_modes_g_00.
                name = re.sub(r"_s\d+$", "_sj", q.name)
                name = re.sub(r"_(0|pi)(?=_|$)", "_g", name) if entry.name in (
                    "end_modes", "edge_modes", "corner_modes", "polygon_modes") else name
                if f"`{name}`" not in text and f"`{q.name}`" not in text:
                    missing.append(q.name)
    assert not sorted(set(missing))


def _combinations(entry):
    drives = {None: (False, True), True: (True,), False: (False,)}[entry.extra.get("driven")]
    return [(d, dr) for d in entry.extra.get("dims", (1, 2)) for dr in drives]


def test_every_reason_variable_and_code_is_documented():
    text = (ROOT / "results-schema.md").read_text()
    missing = []
    for entry in MEASUREMENTS:
        for dim, driven in _combinations(entry):
            for name in reason_names(entry.name, dim, driven).values():
                # per-gap reasons are documented once as MEASUREMENT_g_reason
                doc = re.sub(r"_(0|pi)_reason$", "_g_reason", name)
                if f"`{doc}`" not in text:
                    missing.append(name)
    missing += [r.name.lower() for r in Reason if f"| {int(r)} `{r.name.lower()}` |" not in text]
    assert not sorted(set(missing))


def test_every_quantity_of_a_gap_belongs_to_its_reason_group():
    # A quantity named after a gap (``_0``/``_pi`` token, ``line_w0``/``line_wpi``) of a
    # measurement with per-gap reasons belongs to that gap's group, never to both.
    for entry in MEASUREMENTS:
        for dim, driven in _combinations(entry):
            groups = reason_groups_of(entry.name, dim, driven)
            if not groups:
                continue
            for q in quantities_of(entry.name, dim, driven):
                tokens = q.name.replace("line_w0", "line_0").replace("line_wpi", "line_pi")
                named = [g for g in ("0", "pi") if f"_{g}_" in f"_{tokens}_"]
                assert named == ([q.group] if q.group else []), (entry.name, q.name)
