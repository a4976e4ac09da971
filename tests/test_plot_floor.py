"""Importance-sampling floor series in `plot`: loading floor JSON, trust, labels, union terms."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from cli_helpers import run_cli

from ldpcmarg.errors import InputError
from ldpcmarg.plots.curves import Curve, curves_from_file, plot_curves
from ldpcmarg.plots.floor import (
    FloorSeries,
    UnionTerm,
    floor_series_from_document,
    floor_series_from_file,
    is_floor_document,
    is_floor_file,
    series_label,
    union_term_label,
    union_terms_of,
)
from ldpcmarg.plots.style import style_map


def _q(x):
    # Gaussian tail Q(x) = 1/2 erfc(x / sqrt 2) (standard identity, e.g. Proakis)
    return 0.5 * math.erfc(x / math.sqrt(2.0))


def _point(decoder, ebn0, fer, ci, trust, family="trapping-sets", w_s=4.5, count=2):
    rate, w, a = 0.5, 8, 759
    g = 10 ** (ebn0 / 10)
    return {"decoder": decoder, "ebn0_db": ebn0, "method": "importance-sampling", "fer": fer,
            "fer_ci": list(ci), "confidence": 0.95, "trustworthy": trust, "frames": 1024,
            "effective_hits": 40.0 if trust else 3.0, "equivalent_frames": 1e4,
            "structures": {"family": family, "used": 3, "lightest": []},
            "union_bound": {
                "codewords": {"weight": w, "multiplicity": a, "multiplicity_complete": True,
                              "fer": a * _q(math.sqrt(2 * w * rate * g))},
                "lightest_structures": {"effective_weight": w_s, "count": count,
                                        "fer": count * _q(math.sqrt(2 * w_s * rate * g))}}}


def _doc():
    # an invented scenario: two decoders on a rate-1/2 code "demo-24" of n = 24
    pts = [_point("min-sum", 7.0, 2e-4, (1.4e-4, 2.6e-4), True),
           _point("min-sum", 5.0, 1e-2, (8e-3, 1.2e-2), True),
           _point("min-sum", 8.0, 3e-6, (0.0, 0.4), False),
           _point("ml", 5.0, 4e-3, (3e-3, 5e-3), True, family="codewords", w_s=8, count=64)]
    return {"code": {"name": "demo-24", "n": 24, "k": 12, "rate": 0.5},
            "method": "importance-sampling",
            "settings": {"confidence": 0.95, "min_effective_hits": 30.0}, "points": pts}


def test_floor_document_becomes_one_series_per_decoder():
    series = floor_series_from_document(_doc())
    assert [s.decoder for s in series] == ["min-sum", "ml"]
    ms = series[0]
    np.testing.assert_array_equal(ms.x, [5.0, 7.0, 8.0])  # sorted by Eb/N0
    np.testing.assert_array_equal(ms.trustworthy, [True, True, False])
    np.testing.assert_array_equal(ms.upper, [1.2e-2, 2.6e-4, 0.4])
    assert ms.min_effective_hits == 30.0 and ms.k == 12 and ms.rate == 0.5
    # the codeword term once per code; ml's structures are its codewords, so no second term
    terms = union_terms_of(series)
    assert sorted(t.source for t in terms) == ["codewords", "trapping-sets"]
    cw = next(t for t in terms if t.source == "codewords")
    assert sorted(cw.recorded) == [5.0, 7.0, 8.0]


def test_union_term_is_the_leading_union_bound_term():
    # A_w Q(sqrt(2 w R Eb/N0)): leading term of the ML union bound (Lin & Costello,
    # Error Control Coding, 2nd ed., ch. on soft-decision performance; from memory)
    t = UnionTerm("codewords", 8.0, 759, True, 0.5, "demo-24")
    for ebn0 in (3.0, 6.0, 9.0):
        expected = 759 * _q(math.sqrt(2 * 8 * 0.5 * 10 ** (ebn0 / 10)))
        assert float(t.fer(ebn0)) == pytest.approx(expected, rel=1e-12)
    # and it reproduces the value the file recorded at each point
    for s in floor_series_from_document(_doc()):
        for term in s.union:
            for x, v in term.recorded.items():
                assert float(term.fer(x)) == pytest.approx(v, rel=1e-12)


def test_labels_name_decoder_weight_and_multiplicity():
    s = floor_series_from_document(_doc())[0]
    assert series_label(s, one_code=True) == "min-sum (importance sampling)"
    assert series_label(s, one_code=False) == "demo-24: min-sum (importance sampling)"
    assert union_term_label(UnionTerm("codewords", 8.0, 759, True, 0.5, "demo-24"), True) \
        == "union-bound term, codewords: w=8, A_w=759"
    # an information-set search is not exhaustive: the count is what was found
    assert union_term_label(UnionTerm("codewords", 20.0, 3, False, 0.41, "t"), False) \
        == "union-bound term, t lightest codewords found: w=20, 3 found"
    assert union_term_label(UnionTerm("trapping-sets", 4.6417, 1, False, 0.5, "c", "min-sum"),
                            True) == "union-bound term, min-sum trapping sets: w_eff=4.64, 1 found"


def test_format_detection_and_bad_files(tmp_path):
    floor = tmp_path / "floor.json"
    floor.write_text(json.dumps(_doc()))
    plain = tmp_path / "sim.json"
    plain.write_text(json.dumps({"code": {"name": "c", "n": 24, "k": 12}, "points": []}))
    csv = tmp_path / "sim.csv"
    csv.write_text("decoder,frames\nsum-product,10\n")
    assert is_floor_file(floor) and is_floor_document(_doc())
    assert not is_floor_file(plain) and not is_floor_file(csv)
    assert not is_floor_file(tmp_path / "missing.json")
    with pytest.raises(InputError, match="floor --json file"):
        curves_from_file(floor)
    with pytest.raises(InputError, match="not a floor --json"):
        floor_series_from_file(plain)
    broken = _doc()
    del broken["points"][0]["fer_ci"]
    with pytest.raises(InputError, match="fer_ci"):
        floor_series_from_document(broken)


def _plain(decoder):
    x = np.array([3.0, 4.0, 5.0])
    fer = np.array([0.1, 0.03, 0.008])
    ci = np.column_stack([fer * 0.8, fer * 1.2])
    return Curve(label=f"demo-24: {decoder}", x_kind="ebn0_db", rate=0.5, x=x, ber=fer / 10,
                 ber_ci=ci / 10, fer=fer, fer_ci=ci, decoder=decoder, code="demo-24", n=24,
                 k=12)


def test_figure_styles_and_untrustworthy_points(tmp_path):
    series = floor_series_from_document(_doc())
    fig = plot_curves([_plain("min-sum")], tmp_path / "f.png", floors=series,
                      union_bound=True)
    ax_ber, ax_fer = fig.axes
    # errorbar series: the label sits on the container, the data line is lines[0]
    by_label = {c.get_label(): c.lines[0] for c in ax_fer.containers}
    plain, is_line = by_label["min-sum"], by_label["min-sum (importance sampling)"]
    # the IS series takes the decoder's colour and marker, but dashed
    st = style_map(["min-sum", "ml"])["min-sum"]
    assert is_line.get_color() == plain.get_color() == st["color"]
    assert is_line.get_marker() == plain.get_marker() == st["marker"]
    assert is_line.get_linestyle() == "--" and plain.get_linestyle() == "-"
    # the untrustworthy point at 8 dB shows no estimate: the line is NaN there ...
    y = np.asarray(is_line.get_ydata(), dtype=float)
    assert np.isnan(y[2]) and y[1] == pytest.approx(2e-4)
    # ... and only its upper bound 0.4 appears, as a hollow marker
    hollow = [ln for ln in ax_fer.get_lines() if ln.get_marker() == st["marker"]
              and ln.get_markerfacecolor() in ("white", (1.0, 1.0, 1.0, 1.0))]
    assert any(np.allclose(ln.get_xydata(), [[8.0, 0.4]]) for ln in hollow)
    no_line_at_estimate = [ln for ln in ax_fer.get_lines()
                           if np.any(np.isclose(np.asarray(ln.get_ydata(), float), 3e-6))]
    assert not no_line_at_estimate
    texts = [t.get_text() for t in fig.legends[0].texts]
    assert any(t.startswith("hollow marker with caret: importance sampling not trustworthy")
               and "(< 30 effective hits); only the upper bound" in t for t in texts)
    assert "union-bound term, codewords: w=8, A_w=759" in texts
    assert "ml (importance sampling)" in texts
    # BER is not estimated by floor: the IS series stay off the BER panel
    assert not any("importance sampling" in c.get_label() for c in ax_ber.containers)
    with pytest.raises(InputError, match="does not estimate BER"):
        plot_curves([], tmp_path / "g.png", floors=series, metrics=("ber",))


def test_two_codes_keep_plain_curves_off_the_dashes(tmp_path):
    other = _plain("min-sum")
    other.code, other.label = "other-24", "other-24: min-sum"
    series = [s for s in floor_series_from_document(_doc()) if s.decoder == "min-sum"]
    fig = plot_curves([_plain("min-sum"), other], tmp_path / "f.png", metrics=("fer",),
                      floors=series)
    styles = {c.get_label(): c.lines[0].get_linestyle() for c in fig.axes[0].containers}
    assert styles["demo-24: min-sum (importance sampling)"] == "--"
    assert styles["demo-24: min-sum"] != "--" and styles["other-24: min-sum"] != "--"


def test_floor_series_without_trusted_points_still_get_a_legend_entry(tmp_path):
    s = FloorSeries(decoder="sum-product", code="demo-24", n=24, k=12, rate=0.5,
                    x=np.array([7.0]), fer=np.array([1e-5]), fer_ci=np.array([[0.0, 1.0]]),
                    trustworthy=np.array([False]), upper=np.array([1.0]),
                    effective_hits=np.array([2.0]), min_effective_hits=30.0)
    fig = plot_curves([], tmp_path / "f.png", metrics=("fer",), floors=[s])
    texts = [t.get_text() for t in fig.legends[0].texts]
    assert "sum-product (importance sampling)" in texts
    assert any("not trustworthy" in t for t in texts)


def test_plot_command_draws_simulate_and_floor_json(tmp_path, capsys):
    sim, floor, png = tmp_path / "sim.json", tmp_path / "floor.json", tmp_path / "fig.png"
    status, _, err = run_cli(["simulate", "golay-24-12", "-d", "min-sum", "--ebn0", "2,4",
                              "--seed", "1", "--json", sim, "--max-frames", "2000",
                              "--workers", "1", "-q"], capsys)
    assert status == 0, err
    status, _, err = run_cli(["floor", "golay-24-12", "-d", "min-sum", "--ebn0", "5,7",
                              "--seed", "1", "--json", floor, "--workers", "1",
                              "--candidates", "40", "--max-frames", "2000", "-q"], capsys)
    assert status == 0, err
    # what the floor command records loads, and its union terms are the formula's values
    series = floor_series_from_file(floor)
    assert [s.decoder for s in series] == ["min-sum"]
    cw = next(t for t in series[0].union if t.source == "codewords")
    # Golay(24,12): d_min = 8 with 759 codewords of weight 8 (MacWilliams & Sloane)
    assert (cw.weight, cw.multiplicity, cw.complete) == (8.0, 759, True)
    for x, v in cw.recorded.items():
        assert float(cw.fer(x)) == pytest.approx(v, rel=1e-9)
    status, out, err = run_cli(["plot", sim, floor, "-o", png, "--union-bound"], capsys)
    assert status == 0, err
    assert "1 curve, 1 importance-sampling series" in out
    assert png.read_bytes()[:4] == b"\x89PNG"
    # floor alone draws the FER panel; BER alone is refused with the reason
    status, _, err = run_cli(["plot", floor, "-o", tmp_path / "f.png"], capsys)
    assert status == 0, err
    status, _, err = run_cli(["plot", sim, floor, "-o", tmp_path / "b.png", "--metric", "ber"],
                             capsys)
    assert status == 2 and "does not estimate BER" in err and "Traceback" not in err
    status, _, err = run_cli(["plot", sim, "-o", tmp_path / "u.png", "--union-bound"], capsys)
    assert status == 2 and "floor --json" in err


def test_docstring_examples():
    import doctest

    import ldpcmarg.plots.floor

    res = doctest.testmod(ldpcmarg.plots.floor)
    assert res.failed == 0 and res.attempted >= 2
