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
* ``chern_edge``: the low edge of a ribbon carries ``s C`` net chiral modes (Hatsugai, PRL 71,
  3697 (1993));
* ``w_0_edge``, ``w_pi_edge``: the low edge of a driven ribbon carries ``s W_g`` net chiral
  modes in gap ``g`` (Rudner, Lindner, Berg and Levin, PRX 3, 031005 (2013));
* ``floquet_chern_edge``: a Floquet band group's Chern number is the difference of the
  windings of the gaps above and below it (same source), so on the low edge
  ``s C_upper = e_pi - e_0`` and ``s C_lower = e_0 - e_pi`` with ``e_g`` the edge counts;
* ``line_corner_0``, ``line_corner_pi``: with a two-sector symmetry along the line, each corner
  of a flake holds |w_s1 - w_s2| / 2 modes in that gap, the mirror-graded winding (assumes the
  four corners are related by the model's symmetry, e.g. C4 T, as in the second-order models of
  Schindler et al., Science Advances 4, eaat0346 (2018)).
* ``quadrupole_corner``: a static quadrupole insulator with q_xy = 1/2 holds one zero mode at
  each corner of a flake, one with q_xy = 0 none (Benalcazar, Bernevig and Hughes, Science 357,
  61 (2017), for their chiral-symmetric model, where the corner charge +-e/2 is carried by one
  zero mode per corner; the filled bands, ``band_group = "lower"``, in static jobs only).
* ``corner_charge_triangle``: a C3 crystalline insulator with corner charge 1/3 holds one
  pinned zero mode at each corner of a triangular flake, one with corner charge 0 none (Ezawa,
  PRL 120, 026801 (2018), for the breathing kagome lattice, whose corner charge 1/3 (Benalcazar,
  Li and Hughes, PRB 99, 245151 (2019)) sits in that mode; static jobs with ``polygon_modes``
  on ``shape = "triangle"``). Not comparable (missing) where the count is missing, the
  rotation used is not C3, or the corner charge is neither 0 nor 1/3 (2/3 names no count).

A rule's ``agree`` returns True, False, or None where the two sides cannot be compared although
both are present; :func:`evaluate` stores None as missing.

Chirality sign ``s`` (:func:`edge_sign`): every 2D invariant here (``chern``,
``floquet_chern_*``, ``w_0``, ``w_pi``) is computed in reduced momenta ``k_i = k . a_i``, and the
edge count ``chiral_edge_modes_g`` is ``+1`` per mode on the low edge (cell 0 of the cut
direction) moving towards ``+k_par``. Both therefore depend only on the orbital graph and the
order of the cell vectors, never on their Cartesian handedness: ``s = +1`` for a ribbon cut
along ``a_1`` (``open_axis = 0``), ``s = -1`` for one cut along ``a_2`` (``open_axis = 1``), one
circulation seen from two edges of a sample. For a left-handed cell (``a_1 x a_2 < 0``) the
invariants are minus their values in the Cartesian orientation and the relation is unchanged.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

from ...schema import Quantity

CORNERS = ("00", "10", "01", "11")


@dataclass(frozen=True)
class Rule:
    name: str
    reads: tuple[str, ...]
    agree: Callable[[Mapping[str, Any]], bool | None]
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


def edge_sign(open_axis: int) -> int:
    """``s`` in ``chiral_edge_modes_g = s W_g`` (and ``s C`` for a static gap), low edge.

    ``+1`` for a ribbon cut along ``a_1`` (``open_axis = 0``, ``k_par`` along ``a_2``), ``-1`` for
    one cut along ``a_2`` (``open_axis = 1``, ``k_par`` along ``a_1``); see the module docstring.
    """
    return 1 if open_axis == 0 else -1


def _edge(inv: str, g: str, sign: int) -> Rule:
    return Rule(f"{inv}_edge", (inv, f"chiral_edge_modes_{g}"),
                lambda v: v[f"chiral_edge_modes_{g}"] == sign * v[inv],
                f"s {inv} net chiral modes on the low edge of a ribbon at {g} (s = +1 cut "
                f"along a1, -1 cut along a2)")


def _floquet_chern_edge(sign: int) -> Rule:
    reads = ("floquet_chern_upper", "floquet_chern_lower", "chiral_edge_modes_0",
             "chiral_edge_modes_pi")

    def agree(v: Mapping[str, int]) -> bool:
        flow = v["chiral_edge_modes_pi"] - v["chiral_edge_modes_0"]
        return sign * v["floquet_chern_upper"] == flow == -sign * v["floquet_chern_lower"]

    return Rule("floquet_chern_edge", reads, agree,
                "s floquet_chern_upper = chiral_edge_modes_pi - chiral_edge_modes_0 = "
                "-s floquet_chern_lower on the low edge of a ribbon (s = +1 cut along a1, -1 "
                "cut along a2)")


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


def _quadrupole_corners() -> Rule:
    reads = ("quadrupole", *(f"corner_modes_0_{c}" for c in CORNERS))

    def agree(v: Mapping[str, float]) -> bool:
        return all(v[f"corner_modes_0_{c}"] == round(2 * v["quadrupole"]) for c in CORNERS)

    return Rule("quadrupole_corner", reads, agree,
                "2 q_xy zero modes at each corner of a flake (one for q_xy = 1/2)")


def _corner_charge_triangle() -> Rule:
    reads = ("corner_charge", "corner_charge_order", "polygon_modes_0_min",
             "polygon_modes_0_max")

    def agree(v: Mapping[str, Any]) -> bool | None:
        q = v["corner_charge"]
        per_corner = (v["polygon_modes_0_min"], v["polygon_modes_0_max"])
        if v["corner_charge_order"] != 3:
            return None
        if abs(q - 1 / 3) < 1e-9:
            return per_corner == (1, 1)
        if min(abs(q), abs(q - 1)) < 1e-9:
            return per_corner == (0, 0)
        return None

    return Rule("corner_charge_triangle", reads, agree,
                "one pinned zero mode at every corner of a triangular flake for a C3 corner "
                "charge of 1/3, none for 0")


def rules_for(names: set[str], options: Mapping[str, Mapping[str, Any]] | None = None
              ) -> list[Rule]:
    """The rules whose variables a job stores.

    ``options`` maps a measurement name to its options; the ribbon's ``open_axis`` (of
    ``edge_modes``, default 1) sets the sign of the edge rules.
    """
    axis = dict((options or {}).get("edge_modes", {})).get("open_axis", 1)
    s = edge_sign(axis)
    rules = [_ends("winding", "0"), _ends("nu_0", "0"), _ends("nu_pi", "pi"),
             _edge("chern", "0", s), _edge("w_0", "0", s), _edge("w_pi", "pi", s),
             _floquet_chern_edge(s), _corners("0"), _corners("pi")]
    # Static jobs only (a driven job's flakes have pi counts), filled bands only.
    group = dict((options or {}).get("quadrupole", {})).get("band_group", "lower")
    if "corner_modes_pi_00" not in names and group == "lower":
        rules.append(_quadrupole_corners())
    shape = dict((options or {}).get("polygon_modes", {})).get("shape")
    if "polygon_modes_pi_min" not in names and shape == "triangle":
        rules.append(_corner_charge_triangle())
    return [r for r in rules if set(r.reads) <= names]


def evaluate(rules: list[Rule], values: Mapping[str, object]) -> dict[str, int | None]:
    out: dict[str, int | None] = {}
    for r in rules:
        got = [values.get(n) for n in r.reads]
        if any(x is None or (isinstance(x, float) and x != x) for x in got):
            out[r.quantity.name] = None
        else:
            # Integers as int; a float quantity (q_xy) as it is.
            read = {n: values[n] if isinstance(values[n], float) else int(values[n])
                    for n in r.reads}
            verdict = r.agree(read)
            out[r.quantity.name] = None if verdict is None else int(bool(verdict))
    return out
