"""results-schema.md documents every stored quantity of every registered measurement."""

import re

from sweepcli.physics.measurements import MEASUREMENTS, quantities_of

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
                    "end_modes", "edge_modes", "corner_modes") else name
                if f"`{name}`" not in text and f"`{q.name}`" not in text:
                    missing.append(q.name)
    assert not sorted(set(missing))
