"""Figure styles, legend labels and titles (pure data; no figure drawn except one smoke test)."""

from __future__ import annotations

import numpy as np
import pytest

from ldpcmarg.decoders.base import decoder_names
from ldpcmarg.errors import InputError
from ldpcmarg.plots.curves import Curve, curves_title, plot_curves, uncoded_fer
from ldpcmarg.plots.style import (
    MARKERS,
    decoder_style,
    default_title,
    iteration_cap,
    reference_label,
    style_map,
)


def test_decoder_style_is_stable_and_distinct_for_registered_names():
    names = sorted(decoder_names())
    styles = [decoder_style(n) for n in names]
    # the same spec gives the same style on every call (no dependence on order or set)
    assert [decoder_style(n) for n in reversed(names)] == styles[::-1]
    assert decoder_style("sum-product") == {"color": "#1f77b4", "marker": "o"}
    pairs = {(s["color"], s["marker"]) for s in styles}
    assert len(pairs) == len(names)                    # no two registered decoders alike
    # markers are spread too: with 12 markers no marker serves more than two decoders
    markers = [s["marker"] for s in styles]
    assert max(markers.count(m) for m in set(markers)) <= -(-len(names) // len(MARKERS))


def test_style_map_keeps_own_styles_and_resolves_collisions():
    specs = ["sum-product", "min-sum:alpha=0.75", "layered-sum-product"]
    m1 = style_map(specs)
    m2 = style_map(list(reversed(specs)) + ["lp"])
    for s in specs:
        assert m1[s] == m2[s] == decoder_style(s)      # same across figures
    many = [f"min-sum:alpha={a / 100:g}" for a in range(50, 100)]
    m = style_map(many)
    assert len({(v["color"], v["marker"]) for v in m.values()}) == len(many)


def test_reference_labels_carry_units_once():
    # BI-AWGN Shannon limit of rate 1/2: 0.187 dB (Richardson & Urbanke, Modern Coding Theory)
    assert reference_label("Shannon limit R=0.5", 0.18714, "ebn0_db") == \
        "Shannon limit R=0.5 (0.187 dB)"
    lab = reference_label("BP threshold mycode", 1.1036, "ebn0_db")
    assert lab == "BP threshold mycode (1.10 dB)" and lab.count("1.1") == 1
    assert reference_label("Shannon limit R=0.5", 0.110028, "p") == "Shannon limit R=0.5 (p = 0.11)"


def test_default_title_names_code_channel_and_cap():
    t = default_title([("peg-504-3-6", 504, 252)], "ebn0_db", ["sum-product", "lp"])
    assert t == "peg-504-3-6 (n=504, k=252), BPSK over AWGN, at most 50 iterations"
    t = default_title([("c", 96, 48)], "p", ["gallager-b", "min-sum:max_iter=1"])
    assert "BSC" in t and t.endswith("at most 100 iterations (min-sum 1)")
    many = default_title([("c", 96, 48)], "ebn0_db",
                         [f"min-sum:max_iter={i}" for i in (5, 10, 20, 40)])
    assert many.endswith("at most 5-40 iterations")
    assert iteration_cap("lp") is None and iteration_cap("no-such") is None
    assert default_title([("c", 8, 4)], "ebn0_db", ["sum-product:max_iter=1"]).endswith(
        "at most 1 iteration")


def _curve(decoder, x, fer, code="c"):
    x = np.asarray(x, float)
    fer = np.asarray(fer, float)
    ci = np.column_stack([fer / 2, np.minimum(2 * fer, 1.0) + (fer == 0) * 0.01])
    return Curve(label=f"{code}: {decoder}", x_kind="ebn0_db", rate=0.5, x=x, ber=fer / 10,
                 ber_ci=ci / 10, fer=fer, fer_ci=ci, decoder=decoder, code=code, n=96, k=48)


def test_curves_title_and_es_axis(tmp_path):
    cs = [_curve("sum-product", [1, 2, 3], [0.5, 0.1, 0.0])]
    assert curves_title(cs) == "c (n=96, k=48), BPSK over AWGN, at most 50 iterations"
    fig = plot_curves(cs, tmp_path / "f.png", x_axis="esn0")
    labels = fig.legends[0].texts
    text = [t.get_text() for t in labels]
    # Es/N0 = R Eb/N0: the rate-1/2 Shannon limit 0.187 dB sits at 0.187 - 3.010 dB
    assert "Shannon limit R=0.5 (-2.82 dB)" in text
    assert any("no errors seen" in t for t in text)
    assert any("FER of 48 bits" in t for t in text)
    assert (tmp_path / "f.png").read_bytes()[:4] == b"\x89PNG"
    bsc = Curve(label="b", x_kind="p", rate=0.5, x=np.array([0.01]), ber=np.array([1e-3]),
                ber_ci=np.array([[1e-4, 1e-2]]), fer=np.array([0.1]),
                fer_ci=np.array([[0.05, 0.2]]))
    with pytest.raises(InputError, match="Es/N0 axis needs AWGN"):
        plot_curves([bsc], tmp_path / "g.png", x_axis="esn0")


def test_uncoded_fer_formula():
    # k independent bits: P(frame error) = 1 - (1 - p)^k (common practice)
    assert uncoded_fer(0.01, 100) == pytest.approx(1 - 0.99 ** 100, rel=1e-12)
    assert uncoded_fer(0.0, 10) == 0.0


def test_ml_lower_bound_lines_take_their_decoders_style_not_the_list_position(tmp_path):
    from matplotlib.colors import to_hex

    from ldpcmarg.plots.floor import IS_DASHES, UNION_LINESTYLE
    from ldpcmarg.plots.limits import ML_LB_LINESTYLE, ml_lower_bound_style
    from ldpcmarg.plots.style import LINESTYLES

    def with_bound(decoder, fer):
        c = _curve(decoder, [1, 2, 3], fer)
        c.ml_lb = np.asarray(fer) / 4
        c.ml_lb_ci = np.column_stack([c.ml_lb / 2, c.ml_lb * 2])
        return c

    def bound_lines(curves):
        fig = plot_curves(curves, tmp_path / "f.png", metrics=("fer",))
        lines = fig.axes[0].get_lines()
        return {ln.get_label().split(": ")[1]: ln for ln in lines
                if ln.get_label().endswith("ML lower bound")}

    decs = ["min-sum", "lp", "sum-product"]
    fers = [[0.5, 0.1, 0.02], [0.4, 0.08, 0.01], [0.3, 0.05, 0.005]]
    forward = bound_lines([with_bound(d, f) for d, f in zip(decs, fers, strict=True)])
    backward = bound_lines([with_bound(d, f) for d, f in
                            zip(decs[::-1], fers[::-1], strict=True)])
    styles = style_map(decs)
    for d in decs:
        for ln in (forward[d], backward[d]):
            # the decoder's colour and marker, whatever its place in the list
            assert to_hex(ln.get_color()) == styles[d]["color"]
            assert ln.get_marker() == styles[d]["marker"]
    # dash-dot-dot: none of the plain, importance-sampling or union-bound line styles
    assert ML_LB_LINESTYLE not in (*LINESTYLES, *IS_DASHES, UNION_LINESTYLE)
    assert ml_lower_bound_style(styles["lp"])["ls"] == ML_LB_LINESTYLE
