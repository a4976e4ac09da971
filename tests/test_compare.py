"""Decoder comparison: exactness on trees, metrics, pairing, references, output, CLI."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from naive import exact_posteriors as naive_posteriors

from ldpcmarg.analysis.capacity import biawgn_capacity
from ldpcmarg.analysis.compare import compare_decoders, posterior_errors, random_codewords
from ldpcmarg.cli import main
from ldpcmarg.code.construct import tree_code
from ldpcmarg.code.io import load_code, save_code
from ldpcmarg.commands.compare import parse_points
from ldpcmarg.decoders.base import make_decoder
from ldpcmarg.errors import InputError

SP = "sum-product:early_stop=false,max_iter=60"


def _exact_capable(code) -> list[str]:
    """Decoders whose output is exact on a cycle-free graph, as far as the registry holds them."""
    specs = [SP, "exact"]
    try:
        make_decoder("fw:entropy=bethe", code)  # Bethe free energy: exact on trees
        specs.append("fw:entropy=bethe")
    except InputError as exc:  # only while the Frank-Wolfe module is absent
        assert "not available" in str(exc)
    return specs


def test_cycle_free_code_every_exact_capable_decoder_matches_exact():
    # On a cycle-free Tanner graph sum-product and the Bethe optimum give the
    # exact marginals (Pearl 1988; Yedidia, Freeman & Weiss, IEEE Trans. IT 2005).
    code = tree_code(6, seed=3)
    specs = _exact_capable(code)
    res = compare_decoders(code, specs, snr=[0.0, 2.0, 4.0], frames=25, seed=5,
                           reference="exact")
    assert res.reference.startswith("exact")
    assert len(res.rows) == 3 * len(specs)
    for r in res.rows:
        assert r.max_abs_error < 1e-6, (r.label, r.snr, r.max_abs_error)
        assert r.mean_abs_error < 1e-6
        assert r.mean_kl_bits < 1e-9
    # the exact reference itself against brute-force enumeration of all 2^n words
    # (tests/naive.py, independent of ldpcmarg.decoders.exact)
    from ldpcmarg.decoders.exact import exact_posteriors

    rng = np.random.default_rng(1)
    llr = rng.normal(1.0, 3.0, size=(10, code.n))
    ref = naive_posteriors(code.H.toarray(), llr)
    assert np.max(np.abs(exact_posteriors(code, llr).p1 - ref)) < 1e-12


def test_loopy_decoders_are_not_exact_on_a_code_with_cycles(hamming74):
    # Control for the test above: Hamming(7,4) has 4-cycles, so sum-product is
    # only approximate and the comparison must show it (errors well above 1e-6).
    res = compare_decoders(hamming74, [SP], snr=[1.0], frames=200, seed=2, reference="exact")
    assert res.rows[0].max_abs_error > 1e-2


def test_posterior_errors_closed_form():
    # KL(Bern(1/2) || Bern(1/4)) = 1/2 log2(2) + 1/2 log2(2/3) bits (definition).
    out = posterior_errors(np.array([[0.5]]), p1=np.array([[0.25]]))
    assert out["abs_error"][0, 0] == pytest.approx(0.25)
    assert out["kl_bits"][0, 0] == pytest.approx(0.5 + 0.5 * math.log2(2 / 3), rel=1e-12)
    # identical posteriors: zero
    z = posterior_errors(np.array([[0.3, 0.9]]), llr=np.log([[0.7 / 0.3, 0.1 / 0.9]]))
    assert np.all(z["kl_bits"] < 1e-15) and np.all(z["abs_error"] < 1e-15)
    # confident bits: p = 1/(1+e^50), q = 1/(1+e^40). To first order
    # KL = p ln(p/q) + (q - p) nats = q - 11 p (series of the definition);
    # a tanh-based P(x=1) would round q to 0 and give nonsense.
    kl = posterior_errors(np.array([[1 / (1 + math.exp(50))]]), llr=np.array([[40.0]]),
                          ref_llr=np.array([[50.0]]))["kl_bits"][0, 0]
    p, q = math.exp(-50), math.exp(-40)
    assert kl == pytest.approx((q - 11 * p) / math.log(2), rel=1e-6)
    # a decoder that is certain of the wrong value: infinite divergence
    inf = posterior_errors(np.array([[0.5]]), p1=np.array([[0.0]]))["kl_bits"][0, 0]
    assert inf == math.inf


def test_frames_are_paired_and_reproducible(hamming74):
    specs = [SP, "min-sum:early_stop=false", SP]
    a = compare_decoders(hamming74, specs, snr=[1.0, 3.0], frames=60, seed=9)
    b = compare_decoders(hamming74, specs, snr=[1.0, 3.0], frames=60, seed=9)
    c = compare_decoders(hamming74, specs, snr=[1.0, 3.0], frames=60, seed=10)
    keys = ("bit_errors", "frame_errors", "mean_abs_error", "ece", "mutual_information")
    assert [[getattr(r, k) for k in keys] for r in a.rows] == \
        [[getattr(r, k) for k in keys] for r in b.rows]
    assert [r.mutual_information for r in a.rows] != [r.mutual_information for r in c.rows]
    # the same decoder twice sees the same frames: identical rows, distinct labels
    assert a.decoders[0] != a.decoders[2] and a.decoders[2].endswith("#2")
    for s in (1.0, 3.0):
        r0, r2 = [r for r in a.rows if r.snr == s and r.decoder == a.rows[0].decoder]
        assert (r0.bit_errors, r0.mean_kl_bits, r0.ece) == (r2.bit_errors, r2.mean_kl_bits, r2.ece)


def test_random_codewords_are_codewords_and_uniform(hamming74):
    rng = np.random.default_rng(4)
    cw = random_codewords(hamming74, 16000, rng)
    assert np.all(hamming74.is_codeword(cw))
    # all 16 codewords appear, each about 1000 times (binomial sd ~ 31)
    _, counts = np.unique(cw, axis=0, return_counts=True)
    assert counts.size == 16 and np.all(np.abs(counts - 1000) < 160)


def test_channel_llrs_are_calibrated_and_reach_capacity(hamming74):
    # 'hard-decision' passes the channel LLRs 2y/sigma^2 through; they are true
    # LLRs, so they are calibrated and their MI is the BI-AWGN capacity at
    # Es/N0 (Richardson & Urbanke, Modern Coding Theory). 140 000 bits give an
    # MI standard error of about 0.002.
    res = compare_decoders(hamming74, ["hard-decision"], snr=[0.0], snr_unit="esn0",
                           frames=20000, seed=3, num_bins=10, binning="uniform")
    r = res.rows[0]
    assert abs(r.mutual_information - biawgn_capacity(esn0_db=0.0)) < 0.01
    assert r.ece < 0.01
    assert r.calibration.confidence != "over-confident"
    # uncoded BER of BPSK at Es/N0 = 0 dB: Q(sqrt(2 Es/N0)) = 0.0786 (textbook,
    # e.g. Proakis); binomial sd over 140 000 bits ~ 0.0007
    assert abs(r.ber - 0.5 * math.erfc(1.0)) < 0.004


def test_hard_output_decoder_gets_na(hamming74):
    res = compare_decoders(hamming74, ["bit-flipping", SP], snr=[0.05], snr_unit="p",
                           frames=40, seed=1)
    bf = res.for_decoder(res.decoders[0])[0]
    assert not bf.soft and bf.mean_abs_error is None and bf.ece is None and bf.calibration is None
    assert bf.ber >= 0 and bf.mean_iterations >= 0
    table = res.format_table()
    assert "n/a" in table and "bit-flipping" in table
    assert res.channel == "bsc"


def test_reference_when_exact_is_infeasible():
    code = load_code("peg-504-3-6")
    auto = compare_decoders(code, ["min-sum:early_stop=false"], snr=[2.0], frames=3, seed=0)
    assert auto.reference == "none" and "infeasible" in auto.reference_note
    assert auto.rows[0].mean_abs_error is None and auto.rows[0].ece is not None
    named = compare_decoders(code, ["min-sum:early_stop=false"], snr=[2.0], frames=3, seed=0,
                             reference=SP)
    assert named.reference == make_decoder(SP, code).spec
    assert named.rows[0].mean_abs_error is not None
    with pytest.raises(InputError, match="infeasible"):
        compare_decoders(code, ["min-sum"], snr=[2.0], frames=2, reference="exact")


def test_bad_arguments(hamming74):
    with pytest.raises(InputError, match="SNR unit"):
        compare_decoders(hamming74, [SP], snr=[1.0], snr_unit="db")
    with pytest.raises(InputError, match="at least one decoder"):
        compare_decoders(hamming74, [], snr=[1.0])
    with pytest.raises(InputError, match="crossover"):
        compare_decoders(hamming74, [SP], snr=[0.7], snr_unit="p")
    with pytest.raises(InputError, match="no soft output"):
        compare_decoders(hamming74, [SP], snr=[1.0], reference="bit-flipping")
    with pytest.raises(InputError, match="Unknown decoder"):
        compare_decoders(hamming74, ["nope"], snr=[1.0])


def test_json_and_figures(tmp_path, hamming74):
    from ldpcmarg.plots.compare import save_compare_figures

    res = compare_decoders(hamming74, [SP, "min-sum:early_stop=false", "bit-flipping"],
                           snr=[1.0, 3.0], frames=50, seed=0)
    d = json.loads(json.dumps(res.to_dict(), allow_nan=False))
    assert d["reference"].startswith("exact") and len(d["rows"]) == 6
    assert d["units"]["mean_kl_bits"] == "bits per bit"
    paths = save_compare_figures(res, tmp_path / "figs", dpi=40)
    assert {p.name for p in paths} >= {"compare_reliability.png", "compare_posterior_error.png",
                                       "compare_time_accuracy.png"}
    assert all(p.stat().st_size > 1000 for p in paths)
    before = paths[0].stat().st_mtime_ns
    with pytest.raises(InputError, match="exists"):
        save_compare_figures(res, tmp_path / "figs")
    assert paths[0].stat().st_mtime_ns == before


def test_matplotlib_is_imported_lazily():
    code = ("import sys, ldpcmarg.analysis.compare, ldpcmarg.plots.compare; "
            "print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.stdout.strip() == "False", out.stderr


@pytest.mark.parametrize("text, expected", [
    ("1,2,3", [1.0, 2.0, 3.0]),
    ("0:0.25:1", [0.0, 0.25, 0.5, 0.75, 1.0]),
    ("0:0.3:1, 5", [0.0, 0.3, 0.6, 0.9, 5.0]),
])
def test_parse_points(text, expected):
    assert parse_points(text, "ebn0") == pytest.approx(expected)


@pytest.mark.parametrize("text", ["1:0:1", "a,b", "1:2", "", "0:-1:3", "1,1"])
def test_parse_points_rejects(text):
    with pytest.raises(InputError):
        parse_points(text, "ebn0")


def test_cli_compare(tmp_path, hamming74, capsys):
    code_file = str(save_code(hamming74, tmp_path / "h.mtx"))
    out = tmp_path / "cmp.json"
    main(["compare", code_file, "-d", SP, "-d", "min-sum:alpha=0.8,early_stop=false",
          "--ebn0", "1,3", "--frames", "30", "--json", str(out), "--quiet"])
    text = capsys.readouterr().out
    assert "min-sum" in text and "KL" in text and "wrote" in text
    d = json.loads(out.read_text())
    assert d["snr_points"] == [1.0, 3.0] and len(d["rows"]) == 4
    assert any(r["decoder"].startswith("min-sum:alpha=0.8") for r in d["rows"])
    # JSON to standard output
    main(["compare", code_file, "-d", SP, "--bec", "0.3", "--frames", "5", "--json", "-",
          "--quiet"])
    assert json.loads(capsys.readouterr().out)["channel"] == "bec"


@pytest.mark.parametrize("extra, match", [
    ([], "exactly one of"),
    (["--ebn0", "1", "--bsc", "0.1"], "exactly one of"),
    (["--ebn0", "3:1:1"], "is empty: the step points away"),
    (["--bsc", "0.9"], "crossover probability"),
    (["--ebn0", "1", "--reference", "bogus"], "Unknown decoder 'bogus'"),
])
def test_cli_compare_errors(tmp_path, hamming74, capsys, extra, match):
    code_file = str(save_code(hamming74, tmp_path / "h.mtx"))
    with pytest.raises(SystemExit) as exc:
        main(["compare", code_file, "-d", SP, "--frames", "5", "--quiet"] + extra)
    err = capsys.readouterr().err.strip().splitlines()
    assert exc.value.code == 2 and len(err) == 1 and err[0].startswith("Error: ")
    assert match in err[0]


def test_custom_labels(hamming74):
    res = compare_decoders(hamming74, [SP, "min-sum:early_stop=false"], snr=[2.0], frames=5,
                           labels=["BP", "MS"])
    assert res.decoders == ["BP", "MS"] and [r.label for r in res.rows] == ["BP", "MS"]
    assert res.rows[0].decoder == make_decoder(SP, hamming74).spec
    # default labels: the spec strings as written; options recorded in full
    plain = compare_decoders(hamming74, ["min-sum:alpha=0.8,early_stop=false"], snr=[2.0],
                             frames=2)
    assert plain.decoders == ["min-sum:alpha=0.8,early_stop=false"]
    assert plain.rows[0].options["alpha"] == 0.8 and plain.rows[0].options["max_iter"] == 50
    with pytest.raises(InputError, match="distinct"):
        compare_decoders(hamming74, [SP, SP], snr=[2.0], frames=2, labels=["a", "a"])


@pytest.mark.slow
def test_soft_output_study_smoke(tmp_path):
    # The study's --quick mode with 2 frames per point, written to a scratch folder.
    from pathlib import Path

    script = Path(__file__).resolve().parents[1] / "experiments" / "soft_output_study.py"
    proc = subprocess.run([sys.executable, str(script), "--quick", "--frames", "2",
                           "--out", str(tmp_path)], capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr[-2000:]
    for name in ("table.csv", "table.md", "results.json", "soft_output.png"):
        assert (tmp_path / name).stat().st_size > 0
    import csv

    with open(tmp_path / "table.csv") as fh:
        rows = list(csv.DictReader(fh))
    assert {r["code"] for r in rows} == {"golay-24-12", "peg-36-18-3"}
    assert {"SP", "MS"} <= {r["decoder"] for r in rows}
    assert all(r["reference"].startswith("exact") for r in rows)
