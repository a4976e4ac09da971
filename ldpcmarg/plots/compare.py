"""Figures for :class:`ldpcmarg.analysis.compare.CompareResult` (matplotlib, imported lazily).

Every function takes the result (plain data) and an optional matplotlib
``Axes``; with ``ax=None`` it makes a new figure. Error rates, posterior
errors, calibration errors and times are drawn on log axes; points that are
exactly zero cannot be shown there and are left out (the legend says so when
it happens). Legends name each decoder with its non-default options.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .._text import plural
from ..errors import InputError
from .style import decoder_style, style_map

__all__ = [
    "plot_reliability",
    "reliability_figure",
    "plot_posterior_error",
    "plot_time_vs_accuracy",
    "plot_error_rates",
    "plot_calibration_error",
    "save_compare_figures",
]

_POSTERIOR_TITLES = {
    "mean_abs_error": "Mean posterior error against {ref}, {code}",
    "max_abs_error": "Largest posterior error against {ref}, {code}",
    "mean_kl_bits": "KL divergence from the {ref} posteriors, {code}",
}

_METRIC_LABELS = {
    "mean_abs_error": "mean |P(x=1) - reference P(x=1)|",
    "max_abs_error": "max |P(x=1) - reference P(x=1)|",
    "mean_kl_bits": "mean KL(reference || decoder) per bit (bits)",
    "ece": "expected calibration error",
}


def _plt():
    # matplotlib picks a non-interactive backend by itself on headless machines
    import matplotlib.pyplot as plt

    return plt


def _spec_of(result, label):
    for r in result.rows:
        if r.label == label:
            return r.decoder
    return label


def _style(result, label):
    # the same colour and marker as in every other figure (keyed by decoder spec)
    specs = {lab: _spec_of(result, lab) for lab in result.decoders}
    styles = style_map(specs.values())
    return dict(styles.get(specs.get(label, label)) or decoder_style(label))


def _ax(ax, figsize=(7.6, 4.2)):
    if ax is not None:
        return ax.figure, ax
    plt = _plt()
    fig, ax = plt.subplots(figsize=figsize, layout="constrained")
    return fig, ax


def _legend(ax, **kw):
    """Legend outside the axes, to the right, so it never covers a curve."""
    ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0,
              frameon=False, **kw)


def _positive(xs, ys):
    xs, ys = np.asarray(xs, float), np.asarray(ys, float)
    ok = np.isfinite(ys) & (ys > 0)
    return xs[ok], ys[ok], bool(np.any(np.isfinite(ys) & (ys <= 0)))


def _snr_of(result, snr):
    if snr is None:
        return result.snr_points[0]
    for s in result.snr_points:
        if math.isclose(s, snr, rel_tol=1e-9, abs_tol=1e-12):
            return s
    raise InputError(f"No SNR point {snr!r} in the result; points: {result.snr_points}.")


def plot_reliability(result, snr=None, ax=None, *, decoders=None, legend: bool = True):
    """Reliability diagram at one SNR point: observed against stated bit-error probability.

    Parameters
    ----------
    result : CompareResult
    snr : float, optional
        SNR point (default: the first).
    ax : matplotlib Axes, optional
    decoders : list of str, optional
        Labels to draw (default: every decoder with a soft output).
    legend : bool
        Draw a legend on the axes (turn off to build a shared legend).

    Returns
    -------
    matplotlib Axes

    Notes
    -----
    Log–log axes. Markers are bin means, vertical bars the 95 %
    Clopper–Pearson interval of the observed frequency; bins where no error
    was observed are drawn as a downward triangle at the upper end of that
    interval. The diagonal is perfect calibration; points above it mean
    over-confident LLRs (more errors than stated).
    """
    s = _snr_of(result, snr)
    fig, ax = _ax(ax)
    lo_all, hi_all = [], []
    for r in result.rows:
        if r.snr != s or r.calibration is None:
            continue
        if decoders is not None and r.label not in decoders:
            continue
        c = r.calibration
        ok = c.counts > 0
        pred = c.predicted[ok]
        obs = c.observed[ok]
        lo, hi = c.observed_low[ok], c.observed_high[ok]
        st = _style(result, r.label)
        pos = obs > 0
        if np.any(pos):
            yerr = np.vstack([obs[pos] - lo[pos], hi[pos] - obs[pos]])
            ax.errorbar(pred[pos], obs[pos], yerr=yerr, ls="-", lw=1, ms=5, capsize=2,
                        label=f"{r.label} (ECE {c.ece:.2g})", **st)
        else:
            ax.plot([], [], ls="-", label=f"{r.label} (ECE {c.ece:.2g})", **st)
        if np.any(~pos):
            ax.plot(pred[~pos], hi[~pos], ls="none", marker="v", color=st["color"], ms=4,
                    alpha=0.35)
        lo_all.extend(pred[pred > 0].tolist())
        hi_all.extend(hi.tolist())
    # The lowest bin collects everything below the first log edge; its mean can
    # be astronomically small, so the axes start one decade below that edge.
    edges = [r.calibration.bin_edges for r in result.rows
             if r.snr == s and r.calibration is not None]
    first = min((e[1] for e in edges if e[0] == 0.0 and len(e) > 2 and e[1] < 0.05),
                default=None)
    lo_v = first / 10 if first is not None else max(min(lo_all) if lo_all else 1e-6, 1e-12) / 2
    grid = np.array([lo_v, 0.5])
    ax.plot(grid, grid, color="0.5", lw=0.8, ls="--", label="perfect calibration")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(lo_v, 0.7)
    ax.set_ylim(bottom=lo_v)
    ax.set_xlabel("stated bit-error probability 1/(1+e^|L|)")
    ax.set_ylabel("observed bit-error frequency")
    ax.set_title(f"Reliability, {result.code.get('name')}, {_snr_text(result, s)}")
    if legend:
        _legend(ax)
    return ax


def _snr_text(result, s):
    unit = result.snr_unit
    if unit in ("ebn0", "esn0"):
        return f"{'Eb/N0' if unit == 'ebn0' else 'Es/N0'} = {s:g} dB"
    return {"sigma": "sigma", "p": "p", "epsilon": "epsilon"}[unit] + f" = {s:g}"


def reliability_figure(result, *, decoders=None, max_cols: int = 3):
    """One reliability diagram per SNR point in a grid; returns the Figure."""
    plt = _plt()
    k = len(result.snr_points)
    cols = min(k, max_cols)
    rows = math.ceil(k / cols)
    fig, axes = plt.subplots(rows, cols, figsize=(5.2 * cols, 4.2 * rows), layout="constrained",
                             squeeze=False)
    handles: dict = {}
    for i, s in enumerate(result.snr_points):
        ax = axes[i // cols][i % cols]
        plot_reliability(result, s, ax, decoders=decoders, legend=False)
        eces = []
        for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
            # ECE differs per panel: one legend entry per decoder, the ECEs in a corner
            # below the diagonal (stated error far above the observed: rarely drawn on)
            name, _, ece = lab.partition(" (ECE ")
            handles.setdefault(name, h)
            if ece:
                eces.append(f"{name}: {ece.rstrip(')')}")
        if eces:
            ax.text(0.98, 0.02, "ECE\n" + "\n".join(eces), transform=ax.transAxes, ha="right",
                    va="bottom", fontsize=6, color="0.25")
    for j in range(k, rows * cols):
        axes[j // cols][j % cols].set_visible(False)
    from matplotlib.lines import Line2D

    tri = Line2D([], [], ls="none", marker="v", color="0.3", alpha=0.5,
                 label="no error in the bin: upper end of the 95 % interval")
    fig.legend(list(handles.values()) + [tri], list(handles) + [tri.get_label()],
               loc="outside lower center", ncols=min(3, len(handles) + 1), fontsize=8,
               frameon=False)
    return fig


def _per_decoder(result, metric):
    for label in result.decoders:
        rows = result.for_decoder(label)
        xs = [r.snr for r in rows]
        ys = [getattr(r, metric) for r in rows]
        ys = [math.nan if v is None else float(v) for v in ys]
        yield label, xs, ys


def plot_posterior_error(result, metric: str = "mean_abs_error", ax=None, *,
                         legend: bool = True):
    """Posterior error (against the reference) versus SNR, one line per decoder (log y).

    ``metric`` is ``"mean_abs_error"``, ``"max_abs_error"`` or ``"mean_kl_bits"``.
    """
    if metric not in ("mean_abs_error", "max_abs_error", "mean_kl_bits"):
        raise InputError(f"Unknown posterior-error metric {metric!r}.")
    fig, ax = _ax(ax)
    for label, xs, ys in _per_decoder(result, metric):
        x, y, had_zero = _positive(xs, ys)
        if x.size == 0 and not had_zero:
            continue
        ax.plot(x, y, ls="-", label=label + (" (zeros not shown)" if had_zero else ""),
                **_style(result, label))
    ax.set_yscale("log")
    ax.set_xlabel(result.snr_label)
    ax.set_ylabel(_METRIC_LABELS[metric])
    ax.set_title(_POSTERIOR_TITLES[metric].format(ref=result.reference,
                                                  code=result.code.get("name")))
    if legend:
        _legend(ax)
    return ax


def plot_calibration_error(result, ax=None, *, legend: bool = True):
    """Expected calibration error versus SNR, one line per soft-output decoder (log y)."""
    fig, ax = _ax(ax)
    for label, xs, ys in _per_decoder(result, "ece"):
        x, y, had_zero = _positive(xs, ys)
        if x.size == 0:
            continue
        ax.plot(x, y, ls="-", label=label, **_style(result, label))
    ax.set_yscale("log")
    ax.set_xlabel(result.snr_label)
    ax.set_ylabel("expected calibration error")
    ax.set_title(f"Calibration against transmitted bits, {result.code.get('name')}")
    if legend:
        _legend(ax)
    return ax


def _rate_intervals(rows, metric, confidence=0.95):
    from ..engine import stats

    out = []
    for r in rows:
        if metric == "fer":
            out.append(stats.clopper_pearson(r.frame_errors, r.frames, confidence))
        elif r.bit_errors_sq or not r.bit_errors:
            out.append(stats.ber_interval(r.bit_errors, r.bit_errors_sq, r.frames, r.n,
                                          confidence))
        else:  # a result saved before per-frame sums were kept: no honest BER interval
            out.append((math.nan, math.nan))
    return np.array(out, dtype=np.float64).reshape(-1, 2)


def plot_error_rates(result, ax=None, *, legend: bool = True):
    """BER (solid) and FER (dashed) versus SNR with 95 % intervals, log y.

    FER bars are Clopper–Pearson intervals; BER bars treat frames as the
    sampling unit (:func:`ldpcmarg.engine.stats.ber_interval`). Where no error
    was seen a hollow marker shows the upper limit.
    """
    from matplotlib.lines import Line2D

    fig, ax = _ax(ax)
    any_zero = False
    for label in result.decoders:
        rows = result.for_decoder(label)
        st = _style(result, label)
        xs = np.array([r.snr for r in rows], dtype=np.float64)
        for metric, ls, tag in (("ber", "-", "BER"), ("fer", "--", "FER")):
            y = np.array([getattr(r, metric) for r in rows], dtype=np.float64)
            ci = _rate_intervals(rows, metric)
            pos = np.isfinite(y) & (y > 0)
            if pos.any():
                yerr = np.vstack([y[pos] - ci[pos, 0], ci[pos, 1] - y[pos]])
                yerr = np.where(np.isfinite(yerr), np.clip(yerr, 0, None), 0.0)
                ax.errorbar(xs[pos], y[pos], yerr=yerr, ls=ls, capsize=2, ms=5, lw=1.2,
                            label=f"{label} {tag}", **st)
            zero = np.isfinite(y) & (y == 0) & np.isfinite(ci[:, 1])
            if zero.any():
                any_zero = True
                ax.plot(xs[zero], ci[zero, 1], ls="none", marker=st["marker"],
                        color=st["color"], mfc="none", ms=6)
    ax.set_yscale("log")
    ax.set_xlabel(result.snr_label)
    ax.set_ylabel("error rate (BER solid, FER dashed)")
    ax.set_title(f"Error rates with 95 % intervals, {result.code.get('name')}, "
                 f"{plural(result.frames, 'frame')} per point")
    if legend and any_zero:
        h, lab = ax.get_legend_handles_labels()
        z = Line2D([], [], ls="none", marker="o", mfc="none", color="0.3",
                   label="hollow: no errors seen, upper 95 % limit")
        ax.legend(h + [z], lab + [z.get_label()], fontsize=7, loc="upper left",
                  bbox_to_anchor=(1.02, 1.0), borderaxespad=0.0, frameon=False)
        return ax
    if legend:
        _legend(ax)
    return ax


def plot_time_vs_accuracy(result, metric: str = "mean_abs_error", ax=None, *,
                          legend: bool = True):
    """Time per frame (ms, log x) against posterior error (log y); one marker per (decoder, SNR)."""
    if metric not in _METRIC_LABELS:
        raise InputError(f"Unknown accuracy metric {metric!r}.")
    fig, ax = _ax(ax)
    for label in result.decoders:
        rows = result.for_decoder(label)
        t = np.array([1e3 * r.time_per_frame_s for r in rows])
        y = np.array([math.nan if getattr(r, metric) is None else getattr(r, metric)
                      for r in rows], dtype=float)
        ok = np.isfinite(y) & (y > 0) & (t > 0)
        if not np.any(ok):
            continue
        ax.plot(t[ok], y[ok], ls=":", label=label, **_style(result, label))
        for tt, yy, r in zip(t[ok], y[ok], [r for r, o in zip(rows, ok, strict=True) if o],
                             strict=True):
            ax.annotate(f"{r.snr:g}", (tt, yy), fontsize=6, xytext=(3, 3),
                        textcoords="offset points")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("time per frame (ms, wall clock)")
    ax.set_ylabel(_METRIC_LABELS[metric])
    ax.set_title(f"Time against accuracy (labels: {result.snr_label})", fontsize=9)
    if legend:
        _legend(ax)
    return ax


def save_compare_figures(result, outdir, *, stem: str = "compare", fmt: str = "png",
                         force: bool = False, dpi: int = 130) -> list[Path]:
    """Write the standard set of comparison figures; return their paths.

    Files: ``<stem>_reliability``, ``<stem>_error_rates``, ``<stem>_calibration``
    and, when a posterior reference exists, ``<stem>_posterior_error``,
    ``<stem>_kl`` and ``<stem>_time_accuracy`` (``.<fmt>`` each). Existing
    files are kept unless ``force``.
    """
    out = Path(outdir)
    names = ["reliability", "error_rates", "calibration"]
    has_ref = any(r.mean_abs_error is not None for r in result.rows)
    if has_ref:
        names += ["posterior_error", "kl", "time_accuracy"]
    paths = [out / f"{stem}_{n}.{fmt}" for n in names]
    if not force:
        for p in paths:
            if p.exists():
                raise InputError(f"Figure {p} exists; pass --force (force=True) to overwrite.")
    out.mkdir(parents=True, exist_ok=True)
    plt = _plt()
    written = []
    for name, path in zip(names, paths, strict=True):
        if name == "reliability":
            fig = reliability_figure(result)
        else:
            fig, ax = _ax(None)
            if name == "error_rates":
                plot_error_rates(result, ax)
            elif name == "calibration":
                plot_calibration_error(result, ax)
            elif name == "posterior_error":
                plot_posterior_error(result, "mean_abs_error", ax)
            elif name == "kl":
                plot_posterior_error(result, "mean_kl_bits", ax)
            else:
                plot_time_vs_accuracy(result, "mean_abs_error", ax)
        fig.savefig(path, dpi=dpi)
        plt.close(fig)
        written.append(path)
    return written
