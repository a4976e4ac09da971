"""Short-code extras of the FER panel: ML lower bounds and finite-length limits.

Kept apart from :mod:`ldpcmarg.plots.curves` (which calls these two functions
from one hook) so the figure styling there can change independently.

* :func:`draw_ml_lower_bounds` draws, for each curve that carries one, the
  lower bound on the block-ML FER counted during the simulation (frames on
  which the decoder's valid output was at least as likely as the sent word),
  dash-dot-dot in its decoder's colour, with its confidence interval as a band.
* :func:`draw_finite_length_limits` draws, for each (n, k), Shannon's 1959
  sphere-packing bound (AWGN), the normal approximation and the RCU bound of
  :mod:`ldpcmarg.analysis.limits` over the x range of the figure.
"""

from __future__ import annotations

import numpy as np

__all__ = ["draw_ml_lower_bounds", "ml_lower_bound_style", "draw_finite_length_limits",
           "limits_grid", "MAX_LIMIT_POINTS", "ML_LB_LINESTYLE"]

#: Points per limit curve (each RCU/sphere-packing point costs a fraction of a second).
MAX_LIMIT_POINTS = 13

#: Dash-dot-dot line of the ML lower bounds: apart from the plain curves' styles
#: (``style.LINESTYLES``), the importance-sampling dashes and the union-bound dots.
ML_LB_LINESTYLE = (0, (4, 1.5, 1, 1.5, 1, 1.5))

_CHANNEL_OF_KIND = {"ebn0_db": "awgn", "p": "bsc", "epsilon": "bec"}
_STYLE = {"sphere_packing": ("-", "sphere packing (1959)"),
          "normal_approximation": ("--", "normal approx."),
          "rcu": (":", "RCU")}


def draw_ml_lower_bounds(ax, curves, styles: dict | None = None) -> None:
    """ML-lower-bound FER of every curve that has one, in its decoder's colour.

    Parameters
    ----------
    ax : matplotlib Axes
        The FER panel.
    curves : list of Curve
    styles : dict, optional
        Decoder spec -> ``{"color", "marker"}``: the figure's
        :func:`ldpcmarg.plots.style.style_map` (default: one over ``curves``), so
        a bound has the colour of its decoder's FER curve whatever the order of
        the curves. The line is dash-dot-dot (:data:`ML_LB_LINESTYLE`), apart
        from the importance-sampling dashes and the union-bound dots
        (:mod:`ldpcmarg.plots.floor`), with the decoder's marker drawn hollow.
    """
    from .style import style_map

    if styles is None:
        styles = style_map([c.decoder for c in curves])
    for c in curves:
        y = getattr(c, "ml_lb", None)
        if y is None:
            continue
        y = np.asarray(y, dtype=np.float64)
        pos = np.isfinite(y) & (y > 0)
        if not pos.any():
            continue
        st = ml_lower_bound_style(styles[c.decoder])
        ax.plot(c.x[pos], y[pos], label=f"{c.label}: ML lower bound", **st)
        ci = getattr(c, "ml_lb_ci", None)
        if ci is not None:
            ci = np.asarray(ci, dtype=np.float64)
            ax.fill_between(c.x[pos], ci[pos, 0], ci[pos, 1], color=st["color"], alpha=0.12,
                            lw=0)


def ml_lower_bound_style(decoder_style: dict) -> dict:
    """Matplotlib line keywords of an ML-lower-bound series from its decoder's style."""
    return {"ls": ML_LB_LINESTYLE, "lw": 1.0, "color": decoder_style["color"],
            "marker": decoder_style["marker"], "ms": 4, "mfc": "white"}


def limits_grid(kind: str, x_left: float, x_right: float,
                points: int = MAX_LIMIT_POINTS) -> np.ndarray:
    """Channel parameters at which to evaluate the limits over the figure's x range."""
    lo, hi = float(x_left), float(x_right)
    if kind == "p":
        lo, hi = max(lo, 1e-4), min(hi, 0.5)
    elif kind == "epsilon":
        lo, hi = max(lo, 1e-4), min(hi, 1.0 - 1e-4)
    if not hi > lo:
        return np.zeros(0)
    return np.linspace(lo, hi, int(points))


def draw_finite_length_limits(ax, kind: str, sizes, x_left: float, x_right: float,
                              progress=None) -> None:
    """Finite-length limit curves for each ``(n, k)`` in ``sizes`` (FER panel).

    Parameters
    ----------
    ax : matplotlib Axes
    kind : {"ebn0_db", "p", "epsilon"}
        x axis: Eb/N0 in dB (AWGN, rate k/n), BSC p or BEC erasure probability.
    sizes : iterable of (int, int)
    x_left, x_right : float
    progress : callable, optional
        Called with a short text before each (n, k) is computed.
    """
    from ..analysis.limits import limit_curves

    channel = _CHANNEL_OF_KIND[kind]
    grid = limits_grid(kind, x_left, x_right)
    if grid.size == 0:
        return
    for j, (n, k) in enumerate(sorted(set(sizes))):
        if progress is not None:
            progress(f"finite-length limits n={n}, k={k} ({grid.size} points)")
        res = limit_curves(channel, grid, n, k)
        color = f"{0.15 + 0.25 * (j % 3):.2f}"
        for key, (ls, name) in _STYLE.items():
            y = res[key]
            ok = np.isfinite(y) & (y > 0)
            if not ok.any():
                continue
            ax.plot(grid[ok], y[ok], ls=ls, lw=1.2, color=color,
                    label=f"{name} n={n}, k={k}")

