"""``sweepcli sample --wilson``: the Wilson-loop spectrum at one grid point, drawn.

The data come from :func:`sweepcli.report.wilson_data.wilson_point`; this module only draws
them with matplotlib: the Wannier centres ``nu`` in ``[0, 1)`` of loops along ``k_1`` against
``k_2`` and along ``k_2`` against ``k_1`` (2D; the centres of the one loop in 1D), and in 2D the
nested Wilson loops of the sectors ``nu in (0, 1/2)`` (the Wannier-sector polarisation against
the base momentum), with the values the file stores at the point.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np

from ..errors import SweepError
from ..store import Results
from .maps import FORMATS
from .wilson_data import WilsonDrawing, wilson_point

BAND_COLOUR = "tab:blue"
NESTED_COLOURS = ("tab:red", "tab:green")
_PI_TICKS = ([0, np.pi / 2, np.pi, 3 * np.pi / 2, 2 * np.pi], ["0", "π/2", "π", "3π/2", "2π"])


def _fmt(v) -> str:
    if v is None:
        return "missing"
    return f"{v:.4g}" if isinstance(v, float) else str(v)


def _title(title: str, d: WilsonDrawing) -> str:
    where = ", ".join(f"{k} = {v:g}" for k, v in d.params.items())
    group = ("the filled bands" if not d.driven else "the Floquet bands in (-π/T, 0)") \
        if d.band_group == "lower" else \
        ("the empty bands" if not d.driven else "the Floquet bands in (0, π/T)")
    lines = [title, where, f"Wilson loops of {group} ({d.bands} band(s), band_group = "
                           f"{d.band_group})"]
    stored = [f"{k} {_fmt(v)}" + (f" ({d.stored_reasons[k].replace('_', ' ')})"
                                 if v is None and k in d.stored_reasons else "")
              for k, v in d.stored.items()]
    if stored:
        lines.append("file: " + ", ".join(stored))
    return "\n".join(textwrap.fill(line, 120) for line in lines)


def _draw_bands(ax, d: WilsonDrawing, axis: int) -> None:
    k = d.kperp[axis]
    nu = d.nu[axis]
    perp = 2 - axis
    for j in range(nu.shape[-1]):
        ax.plot(k, nu[:, j], ".", ms=2.5, color=BAND_COLOUR)
    ax.set_xlim(0, 2 * np.pi)
    ax.set_xticks(*_PI_TICKS)
    ax.set_ylim(0, 1)
    for y in (0.5,):
        ax.axhline(y, color="0.6", lw=0.6, ls=":")
    ax.set_xlabel(f"transverse momentum k{perp} [rad]")
    ax.set_ylabel(f"Wannier centre ν{axis + 1} [a{axis + 1}]")
    p, flow, gap = d.polarisation[axis], d.flow[axis], d.wannier_gap[axis]
    text = (f"polarisation {p:.4g}" if math.isfinite(p) else "polarisation: none (centres flow)")
    ax.set_title(f"loops along k{axis + 1} ({d.kmesh[axis]} points): {text}, flow {flow}, "
                 f"Wannier gap {gap:.3g}", fontsize=9)


def _draw_chain(ax, d: WilsonDrawing) -> None:
    nu = d.nu[0][0]
    ax.axhline(0, color="0.6", lw=0.6)
    ax.plot(nu, np.zeros_like(nu), "o", ms=8, mfc=BAND_COLOUR, mec="k")
    for x in nu:
        ax.annotate(f"{x:.4g}", (x, 0), xytext=(0, 10), textcoords="offset points",
                    ha="center", fontsize=8)
    ax.set_xlim(0, 1)
    ax.set_ylim(-1, 1)
    ax.set_yticks([])
    ax.set_xlabel("Wannier centre ν [a1]")
    ax.set_title(f"Wannier centres of the loop ({d.kmesh[0]} points): polarisation "
                 f"{d.polarisation[0]:.4g}, Wannier gap {d.wannier_gap[0]:.3g}", fontsize=9)


def _draw_nested(ax, d: WilsonDrawing) -> None:
    names = {0: ("p_y^{ν_x+}", "k1", "nested along k2"), 1: ("p_x^{ν_y+}", "k2",
                                                             "nested along k1")}
    for axis, per_k in d.nested.items():
        n = per_k.size
        k = 2 * np.pi * np.arange(n) / n
        name, base, nested = names[axis]
        style = dict(marker="o", ms=7, mfc="none", lw=1.6) if axis == 0 else \
            dict(marker=".", ms=5, lw=0.8)
        ax.plot(k, per_k, color=NESTED_COLOURS[axis], **style,
                label=f"{name}: loops along {base}, sector ν in (0, 1/2), {nested}, "
                      f"against {base}")
    ax.set_xlim(0, 2 * np.pi)
    ax.set_xticks(*_PI_TICKS)
    ax.set_ylim(-0.02, 1.02)
    ax.axhline(0.5, color="0.6", lw=0.6, ls=":")
    ax.set_xlabel("momentum along the first loop (k1 for p_y, k2 for p_x) [rad]")
    ax.set_ylabel("Wannier-sector polarisation (mod 1)")
    q = d.quadrupole
    text = (f"q_xy = {q.q:g} (p_x {q.p_x:.4g}, p_y {q.p_y:.4g})" if math.isfinite(q.q) else
            f"q_xy missing ({q.reason.name.lower().replace('_', ' ')})")
    ax.set_title(f"nested Wilson loops ({d.nested_mesh} x {d.nested_mesh} mesh): {text}",
                 fontsize=9)
    if d.nested:
        ax.legend(loc="upper left", fontsize=7, framealpha=0.85)
    else:
        ax.text(0.5, 0.5, "no gapped Wannier sector", transform=ax.transAxes, ha="center",
                va="center", bbox=dict(fc="w", ec="0.5"))


def draw_wilson(results: Results, out: str | Path, *, at: dict[str, float] | None = None,
                label: str = "the results file") -> tuple[Path, WilsonDrawing]:
    """Draw the Wilson-loop spectrum of the grid point of ``results`` nearest to ``at``.

    Parameters
    ----------
    results : a results file written by ``sweepcli run``.
    out : picture file; the format follows the suffix (png, svg, pdf).
    at : swept parameter -> value; the nearest grid value is taken, other axes their first.
    label : how error messages name the results file.

    Returns
    -------
    The written path and the :class:`~sweepcli.report.wilson_data.WilsonDrawing` drawn.
    """
    out = Path(out)
    if out.suffix.lower() not in FORMATS:
        raise SweepError(f"{out}: the picture format follows the suffix, which must be one of "
                         f"{', '.join(FORMATS)}; got {out.suffix or 'none'!r}.")
    drawing = wilson_point(results, at=at, label=label)
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    if drawing.dim == 1:
        fig, ax = plt.subplots(figsize=(8, 3.5), constrained_layout=True)
        _draw_chain(ax, drawing)
    else:
        fig, axes = plt.subplots(1, 3, figsize=(17, 5.5), constrained_layout=True)
        _draw_bands(axes[0], drawing, 0)
        _draw_bands(axes[1], drawing, 1)
        _draw_nested(axes[2], drawing)
    title = results.attrs.get("title", "") or results.attrs.get("job_name", "")
    fig.suptitle(_title(title, drawing), fontsize=10)
    out.parent.mkdir(parents=True, exist_ok=True)
    try:
        fig.savefig(out, dpi=120)
    except OSError as exc:
        raise SweepError(f"{out}: cannot write the picture ({exc.strerror or exc}).") from None
    finally:
        plt.close(fig)
    return out, drawing
