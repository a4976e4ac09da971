"""``ldpcmarg build``: construct a parity-check matrix and write it to a file."""

from __future__ import annotations

from pathlib import Path

import click
import numpy as np

from ..code import construct as C
from ..code.io import load_code, save_code
from ..errors import InputError
from ._outputs import Outputs

_HELP = {
    "gallager": "Gallager (dv, dc)-regular: --length, --bit-degree, --check-degree, --seed.",
    "regular": "random (dv, dc)-regular, no repeated edges: --length, --bit-degree, "
               "--check-degree, --seed.",
    "irregular": "random irregular: --length, --bit-dist, --check-dist, --perspective, --seed.",
    "peg": "progressive edge growth: --length and either --bit-degree/--check-degree "
           "(or --checks) or --bit-dist/--check-dist; --seed, --order.",
    "qc": "quasi-cyclic: --exponents '1,2,4;5,10,-1' (or @file), --circulant.",
    "array": "array code: --prime, --block-rows (bit degree), --block-cols (check degree).",
    "hamming": "Hamming code of length 2^r - 1: --parity-bits r.",
    "golay": "extended Golay (24, 12) code (no options).",
    "repetition": "repetition code: --length.",
    "parity": "single parity-check code: --length.",
    "tree": "cycle-free (tree) code: --checks, --seed, --min-degree, --max-degree.",
}


def _need(value, flag: str, construction: str):
    if value is None:
        raise InputError(f"The {construction} construction needs {flag}.")
    return value


def parse_distribution(text: str, flag: str) -> dict[int, float]:
    """``"2:0.3,3:0.7"`` -> ``{2: 0.3, 3: 0.7}``."""
    out: dict[int, float] = {}
    for part in text.replace(" ", "").split(","):
        if not part:
            continue
        try:
            d, f = part.split(":")
            out[int(d)] = float(f)
        except ValueError:
            raise InputError(f"{flag} must look like '2:0.3,3:0.7' (degree:fraction); "
                             f"could not read {part!r}.") from None
    if not out:
        raise InputError(f"{flag} is empty.")
    return out


def parse_exponents(text: str) -> np.ndarray:
    """Rows separated by ';' or newlines, entries by ',' or spaces; '@path' reads a file."""
    if text.startswith("@"):
        p = Path(text[1:])
        try:
            text = p.read_text()
        except OSError as exc:
            raise InputError(f"Cannot read the exponent file {p}: {exc.strerror or exc}.") from None
    rows = [r for r in text.replace("\n", ";").split(";") if r.strip()]
    try:
        mat = [[int(t) for t in r.replace(",", " ").split()] for r in rows]
    except ValueError:
        raise InputError("--exponents must hold integers (-1 for a zero block), rows "
                         "separated by ';', entries by ','.") from None
    if not mat or len({len(r) for r in mat}) != 1 or not mat[0]:
        raise InputError("--exponents must be a non-empty rectangular matrix.")
    return np.array(mat, dtype=np.int64)


def build_code(construction: str, *, length=None, checks=None, bit_degree=None,
               check_degree=None, bit_dist=None, check_dist=None, perspective="edge",
               exponents=None, circulant=None, prime=None, block_rows=None, block_cols=None,
               parity_bits=None, min_degree=2, max_degree=4, order="ascending", seed=0):
    """Dispatch a construction name and CLI-style options to :mod:`ldpcmarg.code.construct`."""
    c = construction
    if c in ("gallager", "regular"):
        fn = C.gallager if c == "gallager" else C.random_regular
        return fn(_need(length, "--length", c), _need(bit_degree, "--bit-degree", c),
                  _need(check_degree, "--check-degree", c), seed=seed)
    if c == "irregular":
        return C.random_irregular(
            _need(length, "--length", c),
            parse_distribution(_need(bit_dist, "--bit-dist", c), "--bit-dist"),
            parse_distribution(_need(check_dist, "--check-dist", c), "--check-dist"),
            seed=seed, perspective=perspective)
    if c == "peg":
        n = _need(length, "--length", c)
        if bit_dist is not None:
            vd, cd = C.degree_sequences(
                n, parse_distribution(bit_dist, "--bit-dist"),
                parse_distribution(_need(check_dist, "--check-dist", c), "--check-dist"),
                perspective)
            m = checks if checks is not None else cd.size
            return C.peg(n, m, vd, seed=seed, check_degrees=cd if m == cd.size else None,
                         order=order)
        dv = _need(bit_degree, "--bit-degree (or --bit-dist)", c)
        if checks is None:
            dc = _need(check_degree, "--check-degree or --checks", c)
            if (n * dv) % dc:
                raise InputError(f"--length * --bit-degree must be divisible by --check-degree; "
                                 f"got {n} * {dv} and {dc}.")
            checks = n * dv // dc
        return C.peg(n, checks, dv, seed=seed, order=order)
    if c == "qc":
        return C.quasi_cyclic(parse_exponents(_need(exponents, "--exponents", c)),
                              _need(circulant, "--circulant", c))
    if c == "array":
        return C.array_code(_need(prime, "--prime", c), _need(block_rows, "--block-rows", c),
                            _need(block_cols, "--block-cols", c))
    if c == "hamming":
        return C.hamming(_need(parity_bits, "--parity-bits", c))
    if c == "golay":
        return C.golay24()
    if c == "repetition":
        return C.repetition(_need(length, "--length", c))
    if c == "parity":
        return C.single_parity(_need(length, "--length", c))
    if c == "tree":
        return C.tree_code(_need(checks, "--checks", c), seed=seed, min_degree=min_degree,
                           max_degree=max_degree)
    raise InputError(f"Unknown construction {c!r}; accepted: {', '.join(_HELP)}.")


@click.command("build", epilog="\b\nConstructions:\n" + "\n".join(
    f"  {k:10s} {v}" for k, v in _HELP.items()))
@click.argument("construction", type=click.Choice(list(_HELP)), metavar="CONSTRUCTION")
@click.option("-o", "--output", type=click.Path(dir_okay=False, path_type=Path), required=True,
              help="File to write (.mtx, .txt or .npz).")
@click.option("--format", "fmt", type=click.Choice(["mtx", "txt", "npz"]), default=None,
              help="File format (default: from the extension).")
@click.option("-n", "--length", type=click.IntRange(min=1), help="Number of bits n.")
@click.option("-m", "--checks", type=click.IntRange(min=1), help="Number of checks m.")
@click.option("--bit-degree", type=click.IntRange(min=1), help="Bit (variable) degree dv.")
@click.option("--check-degree", type=click.IntRange(min=1), help="Check degree dc.")
@click.option("--bit-dist", help="Bit degree distribution, e.g. '2:0.3,3:0.7'.")
@click.option("--check-dist", help="Check degree distribution, e.g. '6:0.5,7:0.5'.")
@click.option("--perspective", type=click.Choice(["edge", "node"]), default="edge",
              show_default=True, help="Whether distribution fractions count edges or nodes.")
@click.option("--exponents", help="QC exponent matrix: '1,2,4;5,10,-1' or @file (-1 = zero block).")
@click.option("--circulant", type=click.IntRange(min=1), help="QC circulant size Z.")
@click.option("--prime", type=click.IntRange(min=2), help="Array code prime p.")
@click.option("--block-rows", type=click.IntRange(min=1), help="Array code block rows j.")
@click.option("--block-cols", type=click.IntRange(min=1), help="Array code block columns k.")
@click.option("--parity-bits", type=click.IntRange(min=2), help="Hamming code r (n = 2^r - 1).")
@click.option("--min-degree", type=click.IntRange(min=2), default=2, show_default=True,
              help="Tree code: smallest check degree.")
@click.option("--max-degree", type=click.IntRange(min=2), default=4, show_default=True,
              help="Tree code: largest check degree.")
@click.option("--order", type=click.Choice(["ascending", "descending"]), default="ascending",
              show_default=True, help="PEG: order in which bits are processed, by degree.")
@click.option("--seed", type=click.IntRange(min=0), default=0, show_default=True,
              help="Seed of random constructions.")
@click.option("--name", help="Name recorded in the file (default: the construction's name).")
@click.option("--force", is_flag=True, help="Overwrite an existing output file.")
def command(construction, output, fmt, name, force, **opts):
    """Construct a parity-check matrix with CONSTRUCTION and write it to a file.

    Example: ldpcmarg build peg -n 504 --bit-degree 3 --check-degree 6 --seed 1 -o peg504.txt
    """
    outputs = Outputs(force)
    exponents = opts.get("exponents") or ""
    if exponents.startswith("@"):
        outputs.protect_if_file(exponents[1:], f"the exponent file --exponents {exponents}")
    outputs.add(output, "-o")
    outputs.check()
    code = build_code(construction, **opts)
    if name:
        code.name = name
    path = save_code(code, output, fmt=fmt)
    check = load_code(path, fmt=fmt)
    if check.fingerprint != code.fingerprint:  # pragma: no cover - writer/reader mismatch
        raise InputError(f"Internal error: {path} does not read back identically.")
    g = code.girth()
    click.echo(f"wrote {path}: {code.name}, n={code.n}, m={code.m}, k={code.k}, "
               f"rate={code.rate:.4f}, girth={g if g else 'none (cycle-free)'}")
