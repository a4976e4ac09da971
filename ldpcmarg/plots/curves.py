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

On the FER panel the uncoded reference is the probability that a frame of
``k`` uncoded information bits has an error, ``1 - (1 - BER_uncoded)**k``.
AWGN curves can be drawn against Es/N0 (``x_axis="esn0"``):
``Es/N0 = Eb/N0 + 10 log10(R)`` per curve; the uncoded BPSK reference is then
``1/2 erfc(sqrt(Es/N0))`` (rate 1, Es = Eb).

Styles: one colour and marker per decoder spec in every figure
(:func:`ldpcmarg.plots.style.decoder_style`), one line style per code or run;
points with no error are drawn hollow at their upper confidence limit, and
the legend says so. The legend sits outside the panels, below them.
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
from .style import (
    LINESTYLES,
    decoder_style,
    default_title,
    reference_label,
    style_map,
)

__all__ = ["Curve", "curves_from_sweep", "curves_from_store", "curves_from_file",
           "plot_curves", "check_figure_path", "uncoded_bpsk_ber", "FIGURE_FORMATS",
           "curves_title", "decoder_style", "uncoded_fer"]

FIGURE_FORMATS = (".png", ".svg", ".pdf")

_XLABEL = {"ebn0_db": "$E_b/N_0$ (dB)", "esn0_db": "$E_s/N_0$ (dB)",
           "p": "BSC crossover probability $p$",
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
    decoder : str
        Decoder spec (keys the colour and marker); defaults to ``label``.
    code : str
        Code name ("" when unknown).
    n, k : int or None
        Code length and dimension (k: information bits per frame).
    series : str
        Extra tag that tells repeated curves of one decoder and code apart
        (e.g. ``"run 2"``); drawn as a different line style.
    confidence : float
        Level of the intervals.
    ml_lb, ml_lb_ci : ndarray of shape (P,) and (P, 2), float64, or None
        Lower bound on the block-ML FER counted in the simulation and its
        interval (None for sources written before it was counted).
    """

    label: str
    x_kind: str
    rate: float
    x: np.ndarray
    ber: np.ndarray
    ber_ci: np.ndarray
    fer: np.ndarray
    fer_ci: np.ndarray
    decoder: str = ""
    code: str = ""
    n: int | None = None
    k: int | None = None
    series: str = ""
    confidence: float = 0.95
    ml_lb: np.ndarray | None = None
    ml_lb_ci: np.ndarray | None = None
    link: dict | None = None  # link record (plots.link_notes); None for plain BPSK

    def __post_init__(self):
        if not self.decoder:
            self.decoder = self.label.rpartition(": ")[2]


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


_META = ("decoder", "code", "n", "k", "series", "confidence")


def _records_to_curves(records: list[dict], prefix: str = "") -> list[Curve]:
    groups: dict[tuple, list[dict]] = {}
    for r in records:
        groups.setdefault((r["label"], r["x_kind"], r["rate"]), []).append(r)
    out = []
    for (label, kind, rate), rs in groups.items():
        rs = sorted(rs, key=lambda r: r["x"])
        meta = {m: rs[0][m] for m in _META if rs[0].get(m) is not None}
        out.append(Curve(
            label=prefix + label, x_kind=kind, rate=float(rate), link=rs[0].get("link"), **meta,
            x=np.array([r["x"] for r in rs], dtype=np.float64),
            ber=np.array([r["ber"] for r in rs], dtype=np.float64),
            ber_ci=np.array([r["ber_ci"] for r in rs], dtype=np.float64).reshape(-1, 2),
            fer=np.array([r["fer"] for r in rs], dtype=np.float64),
            fer_ci=np.array([r["fer_ci"] for r in rs], dtype=np.float64).reshape(-1, 2),
            **_short_code_fields(rs)))
    return out


def _short_code_fields(rs: list[dict]) -> dict:
    """The ML lower bound of grouped records (None where a source lacks it)."""
    out: dict = {}
    if all(r.get("ml_lb") is not None for r in rs):
        out["ml_lb"] = np.array([r["ml_lb"] for r in rs], dtype=np.float64)
        out["ml_lb_ci"] = np.array([r["ml_lb_ci"] for r in rs],
                                   dtype=np.float64).reshape(-1, 2)
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
                     "fer_ci": p.fer_ci, "decoder": p.decoder,
                     "code": result.code.get("name", ""), "n": p.n, "k": p.k,
                     "confidence": p.confidence,
                     "ml_lb": p.ml_lower_bound_fer, "ml_lb_ci": p.ml_lower_bound_fer_ci,
                     "link": link_from_channel(result.channel)})
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
            "decoder": r["decoder"],
            "code": meta["code_name"], "n": n, "k": k, "confidence": confidence,
            "series": f"run {r['run']}" if several else "",
            "ber": r["info_bit_errors"] / (F * k), "fer": r["frame_errors"] / F,
            "ber_ci": stats.ber_interval(r["info_bit_errors"], r["info_bit_errors_sq"], F, k,
                                         confidence),
            "fer_ci": stats.clopper_pearson(r["frame_errors"], F, confidence),
            **_store_ml_bound(r.get("ml_lower_bound_frame_errors"), F, confidence)})
    return _records_to_curves(recs)


def _store_ml_bound(count, frames: int, confidence: float) -> dict:
    """ML-lower-bound rate and interval of a stored count (None when not counted)."""
    from ..engine import stats

    if count is None:
        return {"ml_lb": None, "ml_lb_ci": None}
    return {"ml_lb": count / frames,
            "ml_lb_ci": stats.clopper_pearson(int(count), frames, confidence)}


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
            from .floor import is_floor_document

            if is_floor_document(doc):
                raise InputError(f"{path!r} is a floor --json file (importance sampling); "
                                 "read it with ldpcmarg.plots.floor.floor_series_from_file "
                                 "and pass it to plot_curves(floors=...).")
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
                             "fer_ci": p["fer_ci"], "decoder": p["decoder"], "code": name,
                             "n": code.get("n"), "k": code.get("k"),
                             "confidence": p.get("confidence", 0.95),
                             "ml_lb": p.get("ml_lower_bound_fer"),
                             "ml_lb_ci": p.get("ml_lower_bound_fer_ci"), "link": link})
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
                         "decoder": r["decoder"], "code": r["code"],
                         "n": int(r["n"]) if r.get("n") else None,
                         "k": int(r["k"]) if r.get("k") else None,
                         "ber_ci": [float(r["ber_ci_lo"]), float(r["ber_ci_hi"])],
                         "fer_ci": [float(r["fer_ci_lo"]), float(r["fer_ci_hi"])],
                         "ml_lb": float(r["ml_lower_bound_fer"])
                         if r.get("ml_lower_bound_fer") else None,
                         "ml_lb_ci": [float(r["ml_lower_bound_fer_ci_lo"]),
                                      float(r["ml_lower_bound_fer_ci_hi"])]
                         if r.get("ml_lower_bound_fer_ci_lo") else None,
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


def _short_code_extras(ax, curves, kind, x_left, x_right, ml_lower_bound, limits, progress,
                       styles=None):
    """Hook into :mod:`ldpcmarg.plots.limits` (ML lower bounds, finite-length limits)."""
    from . import limits as extras

    if ml_lower_bound:
        extras.draw_ml_lower_bounds(ax, curves, styles)
    if limits:
        sizes = [(c.n, c.k) for c in curves if c.n is not None and c.k is not None]
        if not sizes:
            raise InputError("Finite-length limits need the code's n and k, which these "
                             "sources do not record; use a store, --json or --csv file.")
        extras.draw_finite_length_limits(ax, kind, sizes, x_left, x_right, progress)


def _floor_extras(ax, floors, styles, kind, one_code, x_left, x_right, union_bound,
                  curve_labels) -> bool:
    """Hook into :mod:`ldpcmarg.plots.floor` (importance-sampling series, union-bound terms)."""
    from . import floor as extras

    untrusted = extras.draw_floor_series(ax, floors, styles, kind, one_code)
    curve_labels.update(extras.series_label(f, one_code) for f in floors)
    if union_bound:
        extras.draw_union_terms(ax, extras.union_terms_of(floors), styles, kind, x_left,
                                x_right, one_code)
    return untrusted


def _legend_extras(floors) -> dict:
    """Longer legend lines when dashed importance-sampling series are drawn (dashes show)."""
    if not floors:
        return {}
    from matplotlib.legend_handler import HandlerTuple

    # the untrustworthy symbol (marker, caret) side by side
    return {"handlelength": 3.2, "handler_map": {tuple: HandlerTuple(ndivide=None)}}


def _axis_kind(kind: str, x_axis: str) -> str:
    if x_axis not in ("ebn0", "esn0"):
        raise InputError(f"Unknown x axis {x_axis!r}; accepted: ebn0, esn0.")
    if x_axis == "esn0":
        if kind != "ebn0_db":
            raise InputError("An Es/N0 axis needs AWGN results; these curves are against "
                             f"the {'BSC p' if kind == 'p' else 'BEC epsilon'}.")
        return "esn0_db"
    return kind


def _axis_x(c: Curve, axis_kind: str) -> np.ndarray:
    # Es/N0 = R m Eb/N0 with R the transmitted rate and m bits per symbol (BPSK: the
    # code rate and m = 1), i.e. Es/N0 (dB) = Eb/N0 (dB) + 10 log10(R m)
    if axis_kind != "esn0_db":
        return c.x
    rec = c.link or {}
    rate = float(rec.get("transmitted_rate") or c.rate)
    m = int(rec.get("bits_per_symbol") or 1)
    return c.x + 10.0 * math.log10(rate * m)


def _uncoded_ber(grid: np.ndarray, kind: str) -> tuple[np.ndarray, str]:
    if kind in ("ebn0_db", "esn0_db"):
        # uncoded BPSK has rate 1, so Es/N0 = Eb/N0 and the same formula serves both axes
        return uncoded_bpsk_ber(grid), "uncoded BPSK"
    if kind == "p":
        return grid.copy(), "uncoded (BER = p)"
    return grid / 2, "uncoded (BER = eps/2)"


def uncoded_fer(ber_uncoded, k: int) -> np.ndarray:
    """FER of ``k`` uncoded bits: ``1 - (1 - BER)**k`` (independent bit errors)."""
    u = np.asarray(ber_uncoded, dtype=np.float64)
    return -np.expm1(int(k) * np.log1p(-np.clip(u, 0.0, 1.0 - 1e-16)))


def curves_title(curves, x_axis: str = "ebn0") -> str:
    """Default title of a figure of ``curves``: code(s), n, k, channel, iteration cap(s)."""
    kind = _axis_kind(curves[0].x_kind, x_axis)
    return default_title([(c.code, c.n, c.k) for c in curves], kind,
                         [c.decoder for c in curves])


def _series_styles(curves, reserved=()) -> dict:
    keys = list(dict.fromkeys((c.code, c.series) for c in curves))
    free = [ls for ls in LINESTYLES if ls not in reserved] or list(LINESTYLES)
    return {key: free[i % len(free)] for i, key in enumerate(keys)}


def plot_curves(curves, path=None, *, metrics=("ber", "fer"), thresholds: dict | None = None,
                uncoded: bool = True, shannon: bool = True, title: str | None = None,
                axes=None, x_axis: str = "ebn0", ml_lower_bound: bool = True,
                limits: bool = False, progress=None, floors=None, union_bound: bool = False):
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
        Extra vertical lines, e.g. ``{"BP threshold (3,6)": 1.10}``, in the unit of
        the x axis as drawn; the legend appends the value with its unit.
    uncoded : bool
        Draw the uncoded reference on both panels (BER: uncoded BPSK
        ``1/2 erfc(sqrt(Eb/N0))`` on AWGN; FER: a frame of k uncoded bits).
    shannon : bool
        Draw the Shannon limit of each distinct code rate (BI-AWGN), or for
        link curves the BICM limit of the constellation at the transmitted rate.
    title : str, optional
        Default :func:`curves_title` (code, n, k, channel, iteration cap, and
        the shared link when the curves have one); ``""`` for none.
    axes : sequence of matplotlib Axes, optional
        Draw into these (one per metric) instead of a new figure; each then gets
        its own legend.
    x_axis : {"ebn0", "esn0"}
        AWGN results against Eb/N0 (default) or Es/N0, both in dB.
    ml_lower_bound : bool
        FER panel: draw the counted ML lower bound of curves that carry one.
    limits : bool
        FER panel: draw the finite-length limits (sphere packing, normal
        approximation, RCU) for each code's n and k
        (:mod:`ldpcmarg.plots.limits`).
    progress : callable, optional
        Receives a line of text before each slow step (the limit curves).
    floors : list of ldpcmarg.plots.floor.FloorSeries, optional
        Importance-sampling FER series (``floor --json`` files), drawn on the FER
        panel only, dashed in their decoder's colour and marker
        (:mod:`ldpcmarg.plots.floor`). A BER panel needs plain curves.
    union_bound : bool
        FER panel: draw the union-bound terms recorded with ``floors``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    floors = list(floors or [])
    if not curves and not floors:
        raise InputError("Nothing to plot: no points with frames.")
    if floors and "ber" in tuple(metrics) and not curves:
        from .floor import FER_ONLY_MESSAGE

        raise InputError("Nothing to draw on the BER panel: " + FER_ONLY_MESSAGE)
    if union_bound and not floors:
        raise InputError("Union-bound terms come from floor --json files; give one as a source.")
    kinds = {c.x_kind for c in [*curves, *floors]}
    if len(kinds) > 1:
        raise InputError(f"Cannot mix channel parameters on one axis: {sorted(kinds)}.")
    kind = _axis_kind(kinds.pop(), x_axis)
    metrics = tuple(metrics)
    for m in metrics:
        if m not in ("ber", "fer"):
            raise InputError(f"Unknown metric {m!r}; accepted: ber, fer.")
    if path is not None:
        check_figure_path(path)
    own = axes is None
    if own:
        size = (5.2 * len(metrics), 5.0)
        if path is not None:  # no pyplot, no GUI backend: draw straight to the file
            from matplotlib.figure import Figure

            fig = Figure(figsize=size, layout="constrained")
            axs = fig.subplots(1, len(metrics), squeeze=False)
        else:
            import matplotlib.pyplot as plt

            fig, axs = plt.subplots(1, len(metrics), figsize=size, squeeze=False,
                                    layout="constrained")
        axes = list(axs[0])
    else:
        axes = list(axes)
        fig = axes[0].figure
    from matplotlib.lines import Line2D

    xcurves = [_axis_x(c, kind) for c in curves]
    xs = np.concatenate(xcurves + [_axis_x(f, kind) for f in floors])
    xlo, xhi = float(xs.min()), float(xs.max())
    pad = 0.05 * (xhi - xlo) if xhi > xlo else 0.5
    lf = link_figure(curves, shannon, kind)  # link records: labels, title, limit lines
    # curves without a link (and floor series): the BI-AWGN limit of their rate
    rates = sorted({*lf.biawgn_rates, *(round(f.rate, 6) for f in floors)})
    thresholds = {**lf.lines, **(thresholds or {})}
    shannon_x = {}
    if shannon:
        for r in rates:
            sx = _shannon_x("ebn0_db" if kind == "esn0_db" else kind, r)
            if sx is not None and math.isfinite(sx):
                shannon_x[r] = sx + 10.0 * math.log10(r) if kind == "esn0_db" else sx
    edges = [xlo - pad, xhi + pad, *shannon_x.values()]
    edges += [float(v) for v in (thresholds or {}).values()]
    x_left = min(edges) - (pad if min(edges) < xlo - pad else 0.0)
    x_right = max(edges) + (pad if max(edges) > xhi + pad else 0.0)
    grid = np.linspace(x_left, x_right, 200)
    if kind not in ("ebn0_db", "esn0_db"):
        grid = grid[(grid > 0) & (grid < 1)]
    styles = style_map([c.decoder for c in [*curves, *floors]])
    # dashes mark importance sampling: plain curves keep off them when both are drawn
    series = _series_styles(curves, reserved=("--",) if floors else ())
    one_code = len(set(series) | {(f.code, "") for f in floors}) == 1
    ks = sorted({int(c.k) for c in [*curves, *floors] if c.k})
    any_zero = any_untrusted = False
    curve_labels = set()
    for ax, metric in zip(axes, metrics, strict=True):
        for c, x, c_label in zip(curves, xcurves, lf.labels, strict=True):
            y = getattr(c, metric)
            ci = getattr(c, metric + "_ci")
            pos = y > 0
            st = styles[c.decoder]
            ls = series[(c.code, c.series)]
            label = c.decoder + (f" ({c.series})" if c.series else "") if one_code else c.label
            if c_label != c.label:  # curves of different links: the link is in the label
                label = c_label
            curve_labels.add(label)
            if pos.any():
                yerr = np.vstack([y[pos] - ci[pos, 0], ci[pos, 1] - y[pos]])
                ax.errorbar(x[pos], y[pos], yerr=np.clip(yerr, 0, None), ms=5, capsize=3,
                            lw=1.3, ls=ls, label=label, **st)
            else:
                ax.plot([], [], ms=5, lw=1.3, ls=ls, label=label, **st)
            if (~pos).any():  # no errors seen: hollow marker at the upper confidence limit
                any_zero = True
                ax.plot(x[~pos], ci[~pos, 1], ls="none", marker=st["marker"],
                        color=st["color"], mfc="none", ms=6, mew=1.3)
        if metric == "fer" and (ml_lower_bound or limits) and kind != "esn0_db":
            # (drawn against Eb/N0 or the BSC/BEC parameter, as the curves carry them)
            _short_code_extras(ax, curves, kind, x_left, x_right, ml_lower_bound, limits,
                               progress, styles)
        if metric == "fer" and floors:
            any_untrusted = _floor_extras(ax, floors, styles, kind, one_code, x_left, x_right,
                                          union_bound, curve_labels)
        if uncoded and grid.size:
            u, lab = _uncoded_ber(grid, kind)
            if metric == "ber":
                ax.plot(grid, u, "k--", lw=1, label=lab)
            else:
                for j, k in enumerate(ks):
                    ax.plot(grid, uncoded_fer(u, k), color="k", lw=1,
                            ls=((0, (6, 2, 1, 2)), (0, (2, 2)), (0, (8, 2)))[j % 3],
                            label=f"{lab}, FER of {k} bits")
        for r, sx in shannon_x.items():
            ax.axvline(sx, color="0.4", ls=":", lw=1.2,
                       label=reference_label(f"Shannon limit R={r:.3g}", sx, kind))
        for j, (lab, tx) in enumerate((thresholds or {}).items()):
            ax.axvline(float(tx), color="0.15", ls=("-.", (0, (3, 1, 1, 1, 1, 1)))[j % 2],
                       lw=1.1, label=reference_label(lab, float(tx), kind))
        for note in lf.notes:  # limits left out, and why
            ax.plot([], [], " ", label=note)
        ax.set_yscale("log")
        ax.set_xlabel(_XLABEL[kind])
        ax.set_ylabel("bit error rate (information bits)" if metric == "ber"
                      else "frame error rate")
        ax.grid(True, which="both", alpha=0.3)
        lows = [float(np.min(getattr(c, metric + "_ci")[:, 0][getattr(c, metric) > 0]))
                for c in curves if (getattr(c, metric) > 0).any()]
        lows += [float(np.min(getattr(c, metric + "_ci")[:, 1][getattr(c, metric) == 0]))
                 for c in curves if (getattr(c, metric) == 0).any()]
        if metric == "fer" and floors:
            from .floor import floor_y_lows

            lows += floor_y_lows(floors)
        ymin = min(lows or [1e-6])
        # a little head-room above 1 keeps reference curves near 1 (uncoded FER) visible;
        # importance sampling reaches far lower rates than plain Monte Carlo
        ax.set_ylim(max(ymin / 3, 1e-18 if floors and metric == "fer" else 1e-12), 1.5)
        ax.set_xlim(x_left, x_right)
    conf = curves[0].confidence if curves else 0.95
    if any_untrusted:
        from .floor import untrustworthy_handle

        untrusted = untrustworthy_handle(floors)
    zero_handle = Line2D([], [], ls="none", marker="o", mfc="none", color="0.3", ms=6,
                         label=f"hollow marker: no errors seen; upper {100 * conf:g} % "
                               "confidence limit")
    if own:
        handles, labels = {}, []
        for ax in axes:
            for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
                if lab not in handles:
                    handles[lab] = h
                    labels.append(lab)
        # decoders first (in the order given), then the reference lines
        labels.sort(key=lambda lab: lab not in curve_labels)
        hs = [handles[lab] for lab in labels]
        if any_zero:
            hs.append(zero_handle)
            labels.append(zero_handle.get_label())
        if any_untrusted:
            hs.append(untrusted[0])
            labels.append(untrusted[1])
        fig.legend(hs, labels, loc="outside lower center", ncols=2 if len(metrics) > 1 else 1,
                   fontsize=7.5, frameon=False, **_legend_extras(floors))
    else:
        for ax, metric in zip(axes, metrics, strict=True):
            extra = [(zero_handle, zero_handle.get_label())] if any_zero else []
            if any_untrusted and metric == "fer":
                extra.append(untrusted)
            h, lab = ax.get_legend_handles_labels()
            ax.legend(h + [e[0] for e in extra], lab + [e[1] for e in extra], fontsize=7,
                      loc="best", **_legend_extras(floors))
    if title is None:
        title = curves_title([*curves, *floors], x_axis)
        if lf.title:
            title += "\n" + lf.title
    if title:
        fig.suptitle(title, fontsize=10)
    if path is not None:
        fig.savefig(path, dpi=130)
    return fig
