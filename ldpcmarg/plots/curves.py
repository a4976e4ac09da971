"""BER/FER figures from sweep results, a results store, CSV or JSON files.

Computing and drawing are kept apart: :class:`Curve` holds plain arrays,
loaders turn results into curves, and :func:`plot_curves` draws them.
matplotlib is imported only when a figure is drawn.

Reference lines (AWGN, Eb/N0 axis):

* uncoded BPSK, ``BER = Q(sqrt(2 Eb/N0)) = 1/2 erfc(sqrt(Eb/N0))`` (standard
  textbook result, e.g. Proakis, *Digital Communications*);
* the Shannon limit of each code rate for binary-input AWGN
  (:func:`ldpcmarg.analysis.capacity.shannon_limit_ebn0_db`), a vertical line;
* optional thresholds (e.g. density-evolution BP thresholds) passed as
  ``thresholds={label: ebn0_db}``.

Curves of a link other than plain BPSK carry its record (``Curve.link``):
the title (one shared link) or the legend names modulation, fading and the
transmitted rate, and the BI-AWGN limit gives way to the BICM limit of the
constellation (or a note why none is drawn); see :mod:`ldpcmarg.plots.link_notes`.

For BSC/BEC sweeps the x axis is the channel parameter; the reference lines
are the uncoded error rate (``p``; for the BEC half the erasures are guessed
wrong, ``epsilon / 2``) and the capacity limit of the rate.
"""

from __future__ import annotations

import csv
import json
import math
import os
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .link_notes import link_figure, link_from_channel, link_from_csv_row, link_from_store

__all__ = ["Curve", "curves_from_sweep", "curves_from_store", "curves_from_file",
           "plot_curves", "check_figure_path", "uncoded_bpsk_ber", "FIGURE_FORMATS"]

FIGURE_FORMATS = (".png", ".svg", ".pdf")

_XLABEL = {"ebn0_db": "$E_b/N_0$ (dB)", "p": "BSC crossover probability $p$",
           "epsilon": "BEC erasure probability $\\epsilon$"}


@dataclass
class Curve:
    """One decoder on one code: error rates against the channel parameter.

    Attributes
    ----------
    label : str
    x_kind : {"ebn0_db", "p", "epsilon"}
        Es/N0 results are converted to Eb/N0 with the rate.
    rate : float
        Code rate k/n (for the Shannon-limit line).
    x, ber, fer : ndarray of shape (P,), float64
    ber_ci, fer_ci : ndarray of shape (P, 2), float64
        Lower and upper interval bounds.
    """

    label: str
    x_kind: str
    rate: float
    x: np.ndarray
    ber: np.ndarray
    ber_ci: np.ndarray
    fer: np.ndarray
    fer_ci: np.ndarray
    link: dict | None = None  # link record (plots.link_notes); None for plain BPSK


def uncoded_bpsk_ber(ebn0_db) -> np.ndarray:
    """Uncoded BPSK bit error rate ``1/2 erfc(sqrt(Eb/N0))`` (Eb/N0 in dB)."""
    from scipy.special import erfc

    return 0.5 * erfc(np.sqrt(10.0 ** (np.asarray(ebn0_db, dtype=np.float64) / 10.0)))


def check_figure_path(path) -> None:
    """Raise :class:`InputError` unless ``path`` ends in .png, .svg or .pdf."""
    ext = os.path.splitext(os.fspath(path))[1].lower()
    if ext not in FIGURE_FORMATS:
        raise InputError(f"Figure file {os.fspath(path)!r} must end in "
                         f"{', '.join(FIGURE_FORMATS)}; got {ext or 'no extension'!r}.")


def _records_to_curves(records: list[dict], prefix: str = "") -> list[Curve]:
    groups: dict[tuple, list[dict]] = {}
    for r in records:
        groups.setdefault((r["label"], r["x_kind"], r["rate"]), []).append(r)
    out = []
    for (label, kind, rate), rs in groups.items():
        rs = sorted(rs, key=lambda r: r["x"])
        out.append(Curve(
            label=prefix + label, x_kind=kind, rate=float(rate), link=rs[0].get("link"),
            x=np.array([r["x"] for r in rs], dtype=np.float64),
            ber=np.array([r["ber"] for r in rs], dtype=np.float64),
            ber_ci=np.array([r["ber_ci"] for r in rs], dtype=np.float64).reshape(-1, 2),
            fer=np.array([r["fer"] for r in rs], dtype=np.float64),
            fer_ci=np.array([r["fer_ci"] for r in rs], dtype=np.float64).reshape(-1, 2)))
    return out


def _x_of(snr_kind: str, snr: float, rate: float) -> tuple[str, float]:
    if snr_kind == "esn0_db":
        return "ebn0_db", snr - 10.0 * math.log10(rate)
    return snr_kind, snr


def curves_from_sweep(result, code_label: str | None = None) -> list[Curve]:
    """Curves of a :class:`~ldpcmarg.engine.simulate.SweepResult`, one per decoder."""
    name = code_label if code_label is not None else result.code.get("name", "")
    recs = []
    for p in result.points:
        if p.frames == 0:
            continue
        kind, x = _x_of(p.snr_kind, p.snr, p.rate)
        recs.append({"label": f"{name}: {p.decoder}" if name else p.decoder, "x_kind": kind,
                     "rate": p.rate, "x": x, "ber": p.ber, "ber_ci": p.ber_ci, "fer": p.fer,
                     "fer_ci": p.fer_ci, "link": link_from_channel(result.channel)})
    return _records_to_curves(recs)


def curves_from_store(path, run: int | None = None, confidence: float = 0.95) -> list[Curve]:
    """Curves from the counted results of a results store (all runs, or one)."""
    from ..engine import stats
    from ..engine.store import Store

    with Store.open_reader(path) as st:
        meta = st.meta()
        runs = {r["run"]: r for r in st.runs()}
        rows = st.results(run)
        links = {rid: st.get_payload("link_record", str(rid)) for rid in runs}
    if run is not None and run not in runs:
        raise InputError(f"The store {os.fspath(path)!r} has no run {run}; "
                         f"runs: {', '.join(map(str, runs)) or 'none'}.")
    n, k = int(meta["n"]), int(meta["k"])
    rate = k / n
    several = len({r["run"] for r in rows}) > 1
    recs = []
    for r in rows:
        if r["frames"] == 0:
            continue
        settings = runs[r["run"]]["settings"]
        link = link_from_store(settings, links[r["run"]], n, k)
        # Es/N0 -> Eb/N0 with the transmitted rate and bits per symbol of the link
        conv = rate if link is None or not link.get("transmitted_rate") or \
            not link.get("bits_per_symbol") else link["transmitted_rate"] * link["bits_per_symbol"]
        kind, x = _x_of(settings["snr_kind"], r["snr"], conv)
        F = r["frames"]
        label = f"{meta['code_name']}: {r['decoder']}"
        if several:
            label += f" (run {r['run']})"
        recs.append({
            "label": label, "x_kind": kind, "rate": rate, "x": x, "link": link,
            "ber": r["info_bit_errors"] / (F * k), "fer": r["frame_errors"] / F,
            "ber_ci": stats.ber_interval(r["info_bit_errors"], r["info_bit_errors_sq"], F, k,
                                         confidence),
            "fer_ci": stats.clopper_pearson(r["frame_errors"], F, confidence)})
    return _records_to_curves(recs)


def curves_from_file(path) -> list[Curve]:
    """Curves from a ``simulate --json`` or ``--csv`` file, or a results store (by content)."""
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"No such results file: {path!r}.")
    with open(path, "rb") as fh:
        head = fh.read(16)
    if head == b"SQLite format 3\x00":
        return curves_from_store(path)
    try:
        text = open(path, encoding="utf-8").read()
    except UnicodeDecodeError as exc:
        raise InputError(f"{path!r} is neither a results store, JSON nor CSV.") from exc
    stripped = text.lstrip()
    if stripped.startswith("{"):
        try:
            doc = json.loads(text)
            code, points = doc["code"], doc["points"]
            rate = float(code.get("rate", code["k"] / code["n"]))
            name = code.get("name", "")
            link = link_from_channel(doc.get("channel"))
            recs = []
            for p in points:
                if not p["frames"]:
                    continue
                kind = p.get("snr_kind", "ebn0_db")
                kind, x = ("ebn0_db", p["ebn0_db"]) if kind in ("ebn0_db", "esn0_db") \
                    else (kind, p["snr"])
                recs.append({"label": f"{name}: {p['decoder']}" if name else p["decoder"],
                             "x_kind": kind, "rate": rate, "x": float(x),
                             "ber": p["ber"], "ber_ci": p["ber_ci"], "fer": p["fer"],
                             "fer_ci": p["fer_ci"], "link": link})
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{path!r} is not a simulate --json file ({exc}).") from exc
        return _records_to_curves(recs)
    try:
        rows = list(csv.DictReader(text.splitlines()))
        recs = []
        for r in rows:
            if not int(r["frames"]):
                continue
            rate = float(r["rate"])
            kind = r["snr_kind"]
            kind, x = ("ebn0_db", float(r["ebn0_db"])) if kind in ("ebn0_db", "esn0_db") \
                else (kind, float(r["snr"]))
            recs.append({"label": f"{r['code']}: {r['decoder']}", "x_kind": kind, "rate": rate,
                         "x": x, "ber": float(r["ber"]), "fer": float(r["fer"]),
                         "ber_ci": [float(r["ber_ci_lo"]), float(r["ber_ci_hi"])],
                         "fer_ci": [float(r["fer_ci_lo"]), float(r["fer_ci_hi"])],
                         "link": link_from_csv_row(r)})
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{path!r} is not a simulate --csv file (missing or bad {exc}).") from exc
    return _records_to_curves(recs)


def _shannon_x(kind: str, rate: float) -> float | None:
    try:
        from ..analysis import capacity
    except ImportError:  # pragma: no cover
        return None
    try:
        if kind == "ebn0_db":
            return float(capacity.shannon_limit_ebn0_db(rate))
        if kind == "p":
            return float(capacity.bsc_shannon_limit_p(rate))
        if kind == "epsilon":
            return float(capacity.bec_shannon_limit_epsilon(rate))
    except Exception:  # rate 1 has no finite limit
        return None
    return None


def plot_curves(curves, path=None, *, metrics=("ber", "fer"), thresholds: dict | None = None,
                uncoded: bool = True, shannon: bool = True, title: str | None = None,
                axes=None):
    """Draw BER and/or FER curves with confidence-interval error bars.

    Parameters
    ----------
    curves : list of Curve
        All with the same ``x_kind``.
    path : str or path-like, optional
        Save to this .png, .svg or .pdf file.
    metrics : tuple of {"ber", "fer"}
        One panel per metric, side by side.
    thresholds : dict of str to float, optional
        Extra vertical lines, e.g. ``{"BP threshold (3,6)": 1.11}`` in the x unit.
    uncoded : bool
        Draw the uncoded reference (uncoded BPSK ``1/2 erfc(sqrt(Eb/N0))`` on AWGN).
    shannon : bool
        Draw the Shannon limit of each distinct code rate (BI-AWGN), or for
        link curves the BICM limit of the constellation at the transmitted rate.
    title : str, optional
        Default: the shared link of the curves when they have one (else none).
    axes : sequence of matplotlib Axes, optional
        Draw into these (one per metric) instead of a new figure.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if not curves:
        raise InputError("Nothing to plot: no points with frames.")
    kinds = {c.x_kind for c in curves}
    if len(kinds) > 1:
        raise InputError(f"Cannot mix channel parameters on one axis: {sorted(kinds)}.")
    kind = kinds.pop()
    metrics = tuple(metrics)
    for m in metrics:
        if m not in ("ber", "fer"):
            raise InputError(f"Unknown metric {m!r}; accepted: ber, fer.")
    if path is not None:
        check_figure_path(path)
    if axes is None:
        size = (5.2 * len(metrics), 4.2)
        if path is not None:  # no pyplot, no GUI backend: draw straight to the file
            from matplotlib.figure import Figure

            fig = Figure(figsize=size)
            axs = fig.subplots(1, len(metrics), squeeze=False)
        else:
            import matplotlib.pyplot as plt

            fig, axs = plt.subplots(1, len(metrics), figsize=size, squeeze=False)
        axes = list(axs[0])
    else:
        axes = list(axes)
        fig = axes[0].figure
    xs = np.concatenate([c.x for c in curves])
    xlo, xhi = float(xs.min()), float(xs.max())
    pad = 0.05 * (xhi - xlo) if xhi > xlo else 0.5
    lf = link_figure(curves, shannon, kind)  # link records: labels, title, limit lines
    rates = lf.biawgn_rates
    thresholds = {**lf.lines, **(thresholds or {})}
    edges = [xlo - pad, xhi + pad]
    if shannon:
        edges += [v for v in (_shannon_x(kind, r) for r in rates)
                  if v is not None and math.isfinite(v)]
    edges += [float(v) for v in (thresholds or {}).values()]
    x_left = min(edges) - (pad if min(edges) < xlo - pad else 0.0)
    x_right = max(edges) + (pad if max(edges) > xhi + pad else 0.0)
    grid = np.linspace(x_left, x_right, 200)
    if kind != "ebn0_db":
        grid = grid[(grid > 0) & (grid < 1)]
    for ax, metric in zip(axes, metrics, strict=True):
        for i, (c, c_label) in enumerate(zip(curves, lf.labels, strict=True)):
            y = getattr(c, metric)
            ci = getattr(c, metric + "_ci")
            pos = y > 0
            color = f"C{i % 10}"
            if pos.any():
                yerr = np.vstack([y[pos] - ci[pos, 0], ci[pos, 1] - y[pos]])
                ax.errorbar(c.x[pos], y[pos], yerr=np.clip(yerr, 0, None), marker="o", ms=4,
                            capsize=3, lw=1.3, color=color, label=c_label)
            if (~pos).any():  # no errors seen: show the upper confidence bound only
                ax.plot(c.x[~pos], ci[~pos, 1], "v", color=color, ms=5,
                        label=None if pos.any() else c_label + " (upper bound)")
        if uncoded:
            if kind == "ebn0_db":
                u = uncoded_bpsk_ber(grid)
                lab = "uncoded BPSK"
                if metric == "fer":
                    u, lab = None, None
            elif kind == "p":
                u, lab = (grid if metric == "ber" else None), "uncoded (BER = p)"
            else:
                u, lab = (grid / 2 if metric == "ber" else None), "uncoded (BER = eps/2)"
            if u is not None:
                ax.plot(grid, u, "k--", lw=1, label=lab)
        if shannon:
            for r in rates:
                sx = _shannon_x(kind, r)
                if sx is not None and math.isfinite(sx):
                    ax.axvline(sx, color="0.4", ls=":", lw=1.2,
                               label=f"Shannon limit R={r:.3g} ({sx:.3g})")
        for j, (lab, tx) in enumerate((thresholds or {}).items()):
            ax.axvline(float(tx), color=f"C{(j + 5) % 10}", ls="-.", lw=1.1,
                       label=f"{lab} ({float(tx):.3g})")
        for note in lf.notes:  # limits left out, and why
            ax.plot([], [], " ", label=note)
        ax.set_yscale("log")
        ax.set_xlabel(_XLABEL[kind])
        ax.set_ylabel("bit error rate (information bits)" if metric == "ber"
                      else "frame error rate")
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize=7, loc="best")
        ymin = min([float(np.min(getattr(c, metric + "_ci")[:, 0][getattr(c, metric) > 0]))
                    for c in curves if (getattr(c, metric) > 0).any()] or [1e-6])
        ax.set_ylim(max(ymin / 3, 1e-12), 1.0)
        ax.set_xlim(x_left, x_right)
    if title is None:
        title = lf.title
    if title:
        fig.suptitle(title)
    fig.tight_layout()
    if path is not None:
        fig.savefig(path)
    return fig

