"""Bulk-boundary consistency: at each grid point, does an invariant predict the boundary modes
that the open sample shows?

Each rule applies when the job stores all the variables it reads, and yields ``agree_<name>``
(int32): 1 when bulk and boundary agree, 0 when they disagree, missing when either side is
missing at that point. The expected counts are the bulk-boundary correspondences of the
published literature:

* ``winding_end``: a chiral chain with winding nu has |nu| zero modes at each end (Asboth,
  Oroszlany and Palyi 2016, ch. 1 and 3);
* ``nu_0_end``, ``nu_pi_end``: a chiral driven chain has |nu_0| modes at quasienergy 0 and
  |nu_pi| at pi/T at each end (Asboth and Obuse, PRB 88, 121406 (2013));
* ``chern_edge``: a ribbon carries |C| net chiral modes on one edge (Hatsugai, PRL 71, 3697
  (1993)); compared in absolute value, since the sign depends on which edge and direction;
* ``w_0_edge``, ``w_pi_edge``: a driven ribbon carries |W| net chiral modes in each gap
  (Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013));
* ``line_corner_0``, ``line_corner_pi``: with a two-sector symmetry along the line, each corner
  of a flake holds |w_s1 - w_s2| / 2 modes in that gap, the mirror-graded winding (assumes the
  four corners are related by the model's symmetry, e.g. C4 T, as in the second-order models of
  Schindler et al., Science Advances 4, eaat0346 (2018)).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

from ..physics.point import Quantity

CORNERS = ("00", "10", "01", "11")


@dataclass(frozen=True)
class Rule:
    name: str
    reads: tuple[str, ...]
    agree: Callable[[Mapping[str, int]], bool]
    description: str

    @property
    def quantity(self) -> Quantity:
        return Quantity(f"agree_{self.name}", "int32", "1",
                        f"bulk-boundary agreement (1 agree, 0 disagree): {self.description}")


def _ends(inv: str, g: str) -> Rule:
    return Rule(f"{inv}_end" if inv != "winding" else "winding_end",
                (inv, f"end_modes_{g}_left", f"end_modes_{g}_right"),
                lambda v: v[f"end_modes_{g}_left"] == v[f"end_modes_{g}_right"] == abs(v[inv]),
                f"|{inv}| modes at each end at {g}")


def _edge(inv: str, g: str) -> Rule:
    return Rule(f"{inv}_edge", (inv, f"chiral_edge_modes_{g}"),
                lambda v: abs(v[f"chiral_edge_modes_{g}"]) == abs(v[inv]),
                f"|{inv}| chiral modes on one edge of a ribbon at {g}")


def _corners(g: str) -> Rule:
    w = "0" if g == "0" else "pi"
    reads = (f"line_w{w}_s1", f"line_w{w}_s2", "line_sectors",
             *(f"corner_modes_{g}_{c}" for c in CORNERS))

    def agree(v: Mapping[str, int]) -> bool:
        if v["line_sectors"] != 2:
            return False
        expected = abs(v[f"line_w{w}_s1"] - v[f"line_w{w}_s2"]) / 2
        return all(v[f"corner_modes_{g}_{c}"] == expected for c in CORNERS)

    return Rule(f"line_corner_{g}", reads, agree,
                f"|w_s1 - w_s2|/2 modes at each corner of a flake at {g}")


RULES = (_ends("winding", "0"), _ends("nu_0", "0"), _ends("nu_pi", "pi"),
         _edge("chern", "0"), _edge("w_0", "0"), _edge("w_pi", "pi"),
         _corners("0"), _corners("pi"))


def rules_for(names: set[str]) -> list[Rule]:
    """The rules whose variables a job stores."""
    return [r for r in RULES if set(r.reads) <= names]


def evaluate(rules: list[Rule], values: Mapping[str, object]) -> dict[str, int | None]:
    out: dict[str, int | None] = {}
    for r in rules:
        got = [values.get(n) for n in r.reads]
        if any(x is None or (isinstance(x, float) and x != x) for x in got):
            out[r.quantity.name] = None
        else:
            out[r.quantity.name] = int(bool(r.agree({n: int(values[n]) for n in r.reads})))
    return out
