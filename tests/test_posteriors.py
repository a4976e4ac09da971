"""Posteriors for downstream use: inputs, decoding, output formats, bad inputs, CLI."""

from __future__ import annotations

import json
import re
import subprocess
import sys

import numpy as np
import pytest
from naive import exact_posteriors as naive_posteriors

from ldpcmarg.analysis.posteriors import (
    PosteriorResult,
    compute_posteriors,
    output_paths,
    outputs_to_llr,
    parse_channel_spec,
    read_frames,
    read_posteriors,
    write_posteriors,
)
from ldpcmarg.cli import main
from ldpcmarg.code.construct import tree_code
from ldpcmarg.code.io import save_code
from ldpcmarg.code.parity_check import ParityCheckCode
from ldpcmarg.errors import InputError
from ldpcmarg.link.channels import make_channel

SP = "sum-product:early_stop=false,max_iter=60"


@pytest.fixture
def tree():
    return tree_code(5, seed=4)


def test_tree_posteriors_equal_enumeration(tree, seed):
    # Sum-product is exact on a cycle-free graph (Pearl 1988; Kschischang,
    # Frey & Loeliger 2001); reference: enumeration of all 2^n words (tests/naive.py).
    rng = np.random.default_rng(seed)
    llr = rng.normal(1.0, 2.5, size=(20, tree.n))
    res = compute_posteriors(tree, SP, llr=llr)
    ref = naive_posteriors(tree.H.toarray(), llr)
    assert np.max(np.abs(res.p1 - ref)) < 1e-9
    # posterior LLR and p1 agree: p1 = 1 / (1 + e^llr)
    assert np.allclose(res.p1, 1.0 / (1.0 + np.exp(res.llr)), rtol=1e-12, atol=0)
    assert res.p1.shape == (20, tree.n) and res.iterations.shape == (20,)
    # channel outputs give the same answer as their LLRs 2y/sigma^2
    y = 1.0 - 2.0 * (llr < 0) + 0.9 * rng.standard_normal(llr.shape)
    via_out = compute_posteriors(tree, SP, outputs=y, channel="awgn:sigma=0.9")
    via_llr = compute_posteriors(tree, SP, llr=2.0 * y / 0.81)
    assert np.allclose(via_out.llr, via_llr.llr, rtol=1e-12, atol=1e-12)  # rounding of 2/s^2
    assert via_out.meta["channel"]["sigma"] == 0.9 and via_out.meta["input"] == "channel-outputs"


def test_single_frame_and_ebn0_uses_rate(hamming74):
    y = np.array([0.9, -1.1, 0.3, 1.2, 0.8, -0.2, 1.0])
    res = compute_posteriors(hamming74, SP, outputs=y, channel="awgn:ebn0=3")
    sigma = make_channel("awgn", ebn0_db=3.0, rate=4 / 7).sigma  # sigma^2 = 1/(2 R Eb/N0)
    direct = compute_posteriors(hamming74, SP, llr=(2 / sigma**2) * y)
    assert res.p1.shape == (1, 7)
    assert np.allclose(res.llr, direct.llr, rtol=1e-12, atol=1e-12)


def test_bsc_and_bec_outputs(hamming74):
    bsc = compute_posteriors(hamming74, SP, outputs=[0, 0, 0, 0, 0, 0, 1], channel="bsc:p=0.05")
    assert bsc.bits.tolist() == [[0] * 7]  # one flip is corrected
    bec = compute_posteriors(hamming74, SP, outputs=[[2, 0, 0, 0, 0, 0, 0]],
                             channel="bec:epsilon=0.3")
    assert bec.bits.tolist() == [[0] * 7] and bec.p1[0, 0] < 1e-6


def _result_with_certificates(hamming74) -> PosteriorResult:
    rng = np.random.default_rng(11)
    llr = rng.normal(2.0, 2.0, size=(6, 7))
    llr[0, 0] = 900.0  # a very confident bit: p1 = e^-900 underflows to 0 exactly
    res = compute_posteriors(hamming74, SP, llr=llr)
    # certificates of every kind a decoder may return: floats with NaN/inf,
    # bools, ints, words, and a per-frame vector
    res.info.update({
        "duality_gap": np.array([1e-9, np.nan, np.inf, 0.0, 2.5e-300, 1 / 3]),
        "log_partition_bound": np.array([-np.inf, 1.0, 2.0, 3.0, 4.0, 5.0]),
        "ml_certificate": np.array([True, False, True, True, False, True]),
        "oracle_calls": np.arange(6, dtype=np.int64),
        "status": np.array(["converged", "max_iter", "converged", "x", "y", "z"]),
        "pseudo_codeword": rng.random((6, 7)),
    })
    return res


@pytest.mark.parametrize("fmt", ["npz", "npy", "csv"])
def test_round_trip_every_format(tmp_path, hamming74, fmt):
    res = _result_with_certificates(hamming74)
    path = tmp_path / f"post.{fmt}"
    written = write_posteriors(res, path)
    assert set(written) == set(output_paths(path).values())
    back = read_posteriors(path)
    for name in ("p1", "llr", "bits", "iterations", "valid"):
        a, b = getattr(res, name), getattr(back, name)
        assert a.dtype == b.dtype and a.shape == b.shape, name
        assert np.array_equal(a, b), name  # bit-identical
    assert set(back.info) == set(res.info)
    for k, v in res.info.items():
        assert back.info[k].dtype == v.dtype and back.info[k].shape == v.shape, k
        assert np.array_equal(back.info[k], v, equal_nan=v.dtype.kind == "f"), k
    assert back.meta == res.meta
    # every option of the decoder is recorded, not only those in the short spec
    assert back.meta["decoder_options"]["max_iter"] == 60
    assert back.meta["decoder_options"]["early_stop"] is False
    # the sidecar / meta is standard JSON (no NaN tokens)
    if fmt != "npz":
        json.loads(output_paths(path)["sidecar"].read_text(),
                   parse_constant=lambda c: pytest.fail(f"non-standard JSON {c}"))


@pytest.mark.parametrize("fmt", ["npz", "npy", "csv"])
def test_existing_output_kept_unless_forced(tmp_path, hamming74, fmt):
    res = _result_with_certificates(hamming74)
    path = tmp_path / f"post.{fmt}"
    write_posteriors(res, path)
    # any file of the bundle blocks the write, including a sidecar alone
    target = output_paths(path)
    last = list(target.values())[-1]
    before = last.read_bytes()
    with pytest.raises(InputError, match="exists"):
        write_posteriors(res, path)
    assert last.read_bytes() == before
    res.p1[0, 1] = 0.25
    write_posteriors(res, path, force=True)
    assert read_posteriors(path).p1[0, 1] == 0.25


def test_unknown_output_format(tmp_path, hamming74):
    res = _result_with_certificates(hamming74)
    with pytest.raises(InputError, match="output format"):
        write_posteriors(res, tmp_path / "post.xlsx")


# ------------------------------------------------------------- input files
def test_read_frames_formats(tmp_path):
    a = np.arange(14, dtype=np.float64).reshape(2, 7) - 6.5
    np.save(tmp_path / "a.npy", a)
    np.savez(tmp_path / "one.npz", whatever=a)
    np.savez(tmp_path / "two.npz", llr=a, other=a[:1])
    body = "\n".join(",".join(repr(float(v)) for v in r) for r in a)
    (tmp_path / "a.csv").write_text("b0,b1,b2,b3,b4,b5,b6\n" + body + "\n")
    (tmp_path / "a.txt").write_text("# comment\n" + "\n".join(" ".join(map(str, r)) for r in a))
    (tmp_path / "a.tsv").write_text("\n".join("\t".join(map(str, r)) for r in a))
    (tmp_path / "col.dat").write_text("\n".join(str(v) for v in a[0]))
    for name in ("a.npy", "one.npz", "two.npz", "a.csv", "a.txt", "a.tsv"):
        assert np.array_equal(read_frames(tmp_path / name, n=7), a), name
    assert np.array_equal(read_frames(tmp_path / "two.npz", key="other", n=7), a[:1])
    assert np.array_equal(read_frames(tmp_path / "col.dat", n=7), a[:1])


@pytest.mark.parametrize("content, match", [
    ("1,2,3\n4,5\n", "line 2: 2 values where earlier rows have 3"),
    ("1,2,x\n", "'x' is not a number"),
    ("# only a comment\n", "no data rows"),
])
def test_bad_text_inputs(tmp_path, content, match):
    p = tmp_path / "bad.csv"
    p.write_text(content)
    with pytest.raises(InputError, match=match):
        read_frames(p)


def test_bad_input_files(tmp_path):
    a = np.zeros((2, 7))
    np.savez(tmp_path / "multi.npz", first=a, second=a)
    with pytest.raises(InputError, match="several arrays"):
        read_frames(tmp_path / "multi.npz")
    with pytest.raises(InputError, match="no array 'llr'"):
        read_frames(tmp_path / "multi.npz", key="llr")
    (tmp_path / "data.xlsx").write_bytes(b"PK")
    with pytest.raises(InputError, match="Unknown input format '.xlsx'"):
        read_frames(tmp_path / "data.xlsx")
    with pytest.raises(InputError, match="does not exist"):
        read_frames(tmp_path / "nope.npy")
    np.save(tmp_path / "t.npy", np.zeros((7, 3)))
    with pytest.raises(InputError, match=r"n = 7; got shape \(7, 3\) \(the array looks transposed"):
        read_frames(tmp_path / "t.npy", n=7)


@pytest.mark.parametrize("kwargs, match", [
    ({"llr": np.zeros(8)}, r"n = 7; got shape \(1, 8\)"),
    ({"llr": np.zeros((2, 3, 7))}, r"got shape \(2, 3, 7\)"),
    ({"llr": np.array([0.1, 0.2, np.nan, 0, 0, 0, 0])}, r"NaN \(frame 0, bit 2\)"),
    ({"llr": np.array([0.1, 0.2, np.inf, 0, 0, 0, 0])}, "infinite"),
    ({"llr": np.array([0, 1, 1, 0, 0, 1, 0])}, "looks like hard bits"),
    ({"llr": np.full(7, 2.0), "channel": "bsc:p=0.1"}, "channel was given with LLR input"),
    ({"outputs": np.ones(7)}, "need the channel"),
    ({"outputs": [0, 1, 0.5, 1, 0, 0, 1], "channel": "bsc:p=0.1"},
     r"BSC outputs must be 0 or 1; frame 0, bit 2 is 0.5 .*AWGN"),
    ({"outputs": [[0, 1, 0, 1, 0, 0, 3]], "channel": "bec:epsilon=0.1"},
     r"BEC outputs must be 0, 1 or 2 \(erased\); frame 0, bit 6"),
    ({"outputs": [0, 1, 0, 1, 0, 0, 1], "channel": "awgn:ebn0=2"}, "looks like hard bits"),
    ({"outputs": [[np.nan] * 7], "channel": "awgn:ebn0=2"}, r"NaN \(frame 0, bit 0\)"),
    ({"outputs": np.zeros((3, 6)), "channel": "awgn:sigma=1"}, r"got shape \(3, 6\)"),
    ({"llr": np.ones(7), "outputs": np.ones(7)}, "not both"),
])
def test_bad_inputs_rejected(hamming74, kwargs, match):
    with pytest.raises(InputError, match=match):
        compute_posteriors(hamming74, SP, **kwargs)


def test_hard_output_decoder_rejected(hamming74):
    with pytest.raises(InputError, match="hard decisions only"):
        compute_posteriors(hamming74, "bit-flipping", llr=np.full(7, 2.0))


@pytest.mark.parametrize("spec, match", [
    ("awgn", "exactly one of"),
    ("awgn:ebn0=1,sigma=2", "exactly one of"),
    ("awgn:p=0.1", "Bad channel option"),
    ("bsc:p=0.7", r"\(0, 0.5\)"),
    ("rayleigh:snr=1", "Unknown channel 'rayleigh'"),
    ("bec:epsilon=abc", "must be a number"),
])
def test_bad_channel_specs(spec, match):
    with pytest.raises(InputError, match=match):
        parse_channel_spec(spec, rate=0.5)


def test_outputs_to_llr_follows_channel_conventions():
    # BPSK-AWGN LLR 2y/sigma^2, BSC +-ln((1-p)/p), BEC 0 for erasures (DESIGN conventions)
    assert np.allclose(outputs_to_llr([[0.5, -1.0]], make_channel("awgn", sigma=0.5), 2),
                       [[4.0, -8.0]])
    assert np.allclose(outputs_to_llr([1, 0], make_channel("bsc", p=0.1), 2),
                       [[-np.log(9), np.log(9)]])
    assert outputs_to_llr([2, 0], make_channel("bec", epsilon=0.1), 2)[0, 0] == 0.0


# ---------------------------------------------------------------------- CLI
@pytest.fixture
def code_file(tmp_path, hamming74):
    return str(save_code(hamming74, tmp_path / "h74.mtx"))


def _run(argv, capsys):
    with pytest.raises(SystemExit) as exc:
        main(argv)
    out = capsys.readouterr()
    return exc.value.code, out.out, out.err


def test_cli_writes_posteriors(tmp_path, code_file, hamming74, capsys):
    rng = np.random.default_rng(5)
    y = 1.0 + 0.8 * rng.standard_normal((4, 7))
    np.savetxt(tmp_path / "y.csv", y, delimiter=",")
    out = tmp_path / "post.npz"
    main(["posteriors", code_file, str(tmp_path / "y.csv"), "-o", str(out), "--sigma", "0.8",
          "-d", SP])
    text = capsys.readouterr().out
    assert "4 frames" in text and str(out) in text
    back = read_posteriors(out)
    direct = compute_posteriors(hamming74, SP, outputs=read_frames(tmp_path / "y.csv", n=7),
                                channel="awgn:sigma=0.8")
    assert np.array_equal(back.p1, direct.p1)
    assert back.meta["decoder"] == direct.meta["decoder"]
    # the same command again refuses to overwrite ...
    code, _, err = _run(["posteriors", code_file, str(tmp_path / "y.csv"), "-o", str(out),
                         "--sigma", "0.8"], capsys)
    assert code == 2 and "exists; pass --force" in err
    # ... and --force overwrites
    main(["posteriors", code_file, str(tmp_path / "y.csv"), "-o", str(out), "--sigma", "0.8",
          "--force", "--json"])
    summary = json.loads(capsys.readouterr().out)
    assert summary["frames"] == 4


@pytest.mark.parametrize("setup, extra, match", [
    ("y8", [], r"n = 7; got shape \(2, 8\)"),
    ("nan", [], "NaN"),
    ("y7", ["--bsc", "0.1"], "BSC outputs must be 0 or 1"),
    ("y7", ["--bsc", "0.1", "--sigma", "1"], "at most one channel option"),
    ("y7", ["-d", "no-such-decoder"], "Unknown decoder 'no-such-decoder'"),
    ("xlsx", [], "Unknown input format"),
])
def test_cli_bad_inputs_one_line(tmp_path, code_file, capsys, setup, extra, match):
    inp = tmp_path / "in.npy"
    if setup == "y8":
        np.save(inp, np.ones((2, 8)))
    elif setup == "nan":
        np.save(inp, np.array([[1.0, np.nan, 1, 1, 1, 1, 1]]))
    elif setup == "y7":
        np.save(inp, np.full((2, 7), 0.7))
    else:
        inp = tmp_path / "in.xlsx"
        inp.write_text("x")
    code, out, err = _run(["posteriors", code_file, str(inp), "-o", str(tmp_path / "o.npz")]
                          + extra, capsys)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error: "), err
    assert re.search(match, lines[0]), lines[0]
    assert not (tmp_path / "o.npz").exists()


def test_cli_error_in_a_real_process_has_no_traceback(tmp_path, code_file):
    np.save(tmp_path / "bad.npy", np.ones((2, 9)))
    proc = subprocess.run(
        [sys.executable, "-m", "ldpcmarg", "posteriors", code_file, str(tmp_path / "bad.npy"),
         "-o", str(tmp_path / "o.npz")],
        capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert proc.stderr.strip().count("\n") == 0 and "n = 7" in proc.stderr


def test_result_summary_lists_certificates(hamming74):
    res = _result_with_certificates(hamming74)
    s = res.summary()
    assert s["frames"] == 6 and s["duality_gap"]["max"] == 1 / 3
    assert "status" not in s  # words are not summarised numerically


def test_code_built_from_matrix_is_accepted():
    # posteriors work on any ParityCheckCode, not only shipped ones
    code = ParityCheckCode(np.array([[1, 1, 1]]), name="spc3")
    res = compute_posteriors(code, SP, llr=[1.0, 2.0, -0.5])
    # single parity check x1+x2+x3=0: exact posterior by enumeration of the 4 codewords
    ref = naive_posteriors(np.array([[1, 1, 1]]), np.array([1.0, 2.0, -0.5]))
    assert np.allclose(res.p1[0], ref, atol=1e-12)


def test_default_decoder_runs_to_convergence(tree):
    # Why the default turns early stopping off: on a cycle-free code the
    # early-stopped soft outputs are far from the exact posteriors, the full
    # run matches them (reference: enumeration, tests/naive.py).
    rng = np.random.default_rng(3)
    llr = rng.normal(3.0, 2.0, size=(30, tree.n))
    ref = naive_posteriors(tree.H.toarray(), llr)
    default = compute_posteriors(tree, llr=llr)
    early = compute_posteriors(tree, "sum-product", llr=llr)
    assert np.max(np.abs(default.p1 - ref)) < 1e-9
    assert np.max(np.abs(early.p1 - ref)) > 1e-2
