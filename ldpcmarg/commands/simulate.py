"""``ldpcmarg simulate``: Monte Carlo BER/FER sweep over SNR points."""

from __future__ import annotations

import math
import os
import signal
import sys
import time

import click

from ..errors import InputError, RunInterrupted
from ._link_options import build_cli_link, link_input_files, link_options
from ._outputs import Outputs

GRID_HELP = ("a,b,c or start:step:stop (stop included when it lies on the grid; "
             "forms can be mixed: 0:0.5:2,2.25)")


def _load_code(name_or_path):
    try:
        from ..code.io import load_code
    except ModuleNotFoundError as exc:  # pragma: no cover - only while io.py is missing
        raise InputError("Loading codes needs ldpcmarg.code.io, missing from this build.") from exc
    return load_code(name_or_path)


#: Width of progress lines when the terminal's size is unknown (and the most ever used).
PROGRESS_WIDTH = 80


def _snr_label(info: dict) -> str:
    return {"ebn0_db": "Eb/N0 {:g}dB", "esn0_db": "Es/N0 {:g}dB", "p": "p {:g}",
            "epsilon": "eps {:g}"}[info["snr_kind"]].format(info["snr"])


def progress_lines(info: dict, width: int = PROGRESS_WIDTH) -> list[str]:
    """Compact progress lines of one point, one per decoder, each at most ``width`` columns.

    Frames, frame errors, FER and the ETA are always kept; BER and ms per frame
    (decoding only, compilation excluded) are shown when they fit, and a long
    decoder name is shortened first.
    """
    width = max(int(width), 40)
    label = _snr_label(info)
    eta = info["eta"]
    eta_txt = "done" if info["done"] else ("ETA ?" if eta is None else f"ETA {_dur(eta)}")
    names = [d["decoder"] for d in info["decoders"]]
    name_w = min(max(len(n) for n in names), 24)
    lines = []
    for d in info["decoders"]:
        fr = d["frames"]
        fer = "-" if fr == 0 else f"{d['fer']:.2e}"
        ber = "-" if fr == 0 else f"{d['ber']:.2e}"
        ms = d.get("ms_per_frame", float("nan"))
        state = eta_txt if not d["done"] else f"{d['stop']}"
        core = f"{fr}fr {d['frame_errors']}err FER {fer}"
        extras = [f"BER {ber}", f"{ms:.3g}ms/fr" if fr and math.isfinite(ms) else ""]
        extras = [e for e in extras if e]
        while True:
            name = d["decoder"]
            head = f"{label} "
            body = " ".join([core, *extras, state])
            room = width - len(head) - len(body) - 1
            if room >= min(name_w, len(name)) or not extras:
                if room < len(name):
                    name = name[:max(room - 1, 1)] + "~" if room > 1 else name[:1]
                line = f"{head}{name:{min(name_w, max(room, 1))}s} {body}"
                break
            extras.pop()
        lines.append(line[:width])
    return lines


class _Progress:
    """Progress on stderr: compact lines per point and decoder, SNR order in logs.

    On a terminal the lines of the running point are redrawn in place (at most
    the terminal's width, 80 columns when unknown); otherwise one block per
    finished point, printed in grid order. A sweep that continues a store
    first prints how many chunks it reused.
    """

    def __init__(self, enabled: bool, stream=None):
        self.enabled = enabled
        self.stream = stream if stream is not None else sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.last = 0.0
        self.finished: set = set()
        self.drawn = 0  # lines of the running point on screen (terminal)
        self.drawn_index = None
        self.resume_said = False
        self.pending: dict[int, list[str]] = {}
        self.next_index = 0

    def _out(self, text: str, nl: bool = True) -> None:
        click.echo(text, file=self.stream, nl=nl)

    def __call__(self, info: dict):
        if not self.enabled:
            return
        if not self.resume_said:
            self.resume_said = True
            if info.get("reused_chunks"):
                self._out(f"resuming: {info['reused_chunks']} chunks reused")
        if info["done"]:
            if info["index"] in self.finished:
                return
            self.finished.add(info["index"])
        if self.tty:
            self._draw(info)
        elif info["done"]:
            self.pending[info["index"]] = progress_lines(info, PROGRESS_WIDTH)
            while self.next_index in self.pending:
                for line in self.pending.pop(self.next_index):
                    self._out(line)
                self.next_index += 1

    def _draw(self, info: dict) -> None:
        now = time.monotonic()
        if not info["done"] and now - self.last < 0.2 and info["index"] == self.drawn_index:
            return
        self.last = now
        lines = progress_lines(info, min(_term_width(), PROGRESS_WIDTH) - 1)
        if self.drawn and self.drawn_index == info["index"]:
            up = self.drawn - 1  # back to the first line of this point's block
            self._out(f"\x1b[{up}F" if up else "\r", nl=False)
        elif self.drawn:
            self._out("")  # keep the previous point's block as it stands
        self._out("\n".join(ln + "\x1b[K" for ln in lines), nl=info["done"])
        if info["done"]:
            self.drawn, self.drawn_index = 0, None
        else:
            self.drawn, self.drawn_index = len(lines), info["index"]

    def close(self) -> None:
        """Print what is still buffered (points left running or skipped), in grid order."""
        for index in sorted(self.pending):
            for line in self.pending.pop(index):
                self._out(line)
        if self.tty and self.drawn:
            self._out("")
            self.drawn, self.drawn_index = 0, None


def _dur(s: float) -> str:
    if not math.isfinite(s):
        return "?"
    s = int(round(s))
    if s < 60:
        return f"{s}s"
    if s < 3600:
        return f"{s // 60}m{s % 60:02d}s"
    return f"{s // 3600}h{(s % 3600) // 60:02d}m"


def _term_width() -> int:
    """Columns of the terminal on stderr; 80 when unknown (or reported as 0)."""
    try:
        cols = os.get_terminal_size(sys.stderr.fileno()).columns
    except (OSError, ValueError):
        return PROGRESS_WIDTH
    return cols if cols > 0 else PROGRESS_WIDTH


def _terminate(signum, frame):
    raise KeyboardInterrupt


def _positive(name):
    def cb(ctx, param, value):
        if value is not None and value < 1:
            raise click.BadParameter(f"must be >= 1; got {value}.", param_hint=name)
        return value
    return cb


@click.command("simulate", context_settings={"max_content_width": 100})
@click.argument("code")
@click.option("-d", "--decoder", "decoders", multiple=True, required=True, metavar="SPEC",
              help="Decoder, repeatable. SPEC is NAME or NAME:key=value,key=value, e.g. "
                   "sum-product:max_iter=50 or min-sum:alpha=0.8,max_iter=30. "
                   "'ldpcmarg decoders NAME' lists the options.")
@click.option("--channel", type=click.Choice(["awgn", "bsc", "bec"]), default="awgn",
              show_default=True, help="Channel: BPSK over AWGN, BSC or BEC.")
@click.option("--ebn0", metavar="GRID",
              help=f"AWGN Eb/N0 points in dB (uses rate k/n); {GRID_HELP}.")
@click.option("--esn0", metavar="GRID", help="AWGN Es/N0 points in dB (symbol SNR, Es = 1), "
                                              "instead of --ebn0.")
@click.option("--param", "param_grid", metavar="GRID",
              help="BSC crossover probability p or BEC erasure probability epsilon points, "
                   "same GRID syntax (for --channel bsc/bec).")
@click.option("--frame-errors", type=int, default=100, show_default=True,
              callback=_positive("--frame-errors"),
              help="Stop a point (per decoder) after this many frame errors.")
@click.option("--max-frames", type=int, default=1_000_000, show_default=True,
              callback=_positive("--max-frames"), help="Frame cap per point and decoder.")
@click.option("--time-budget", type=float, default=None, metavar="SECONDS",
              help="Wall-clock budget per point; the point keeps what finished in time "
                   "(counts then depend on machine speed).")
@click.option("--fer-floor", type=float, default=None, metavar="FER",
              help="Skip the remaining points once every decoder's FER is below this.")
@click.option("--seed", type=int, default=1, show_default=True,
              help="Run seed; chunk seeds derive from (seed, SNR value, chunk index).")
@click.option("--workers", type=int, default=None, callback=_positive("--workers"),
              help="Local worker processes [default: all cores]; 1 runs in this process.")
@click.option("--cluster", metavar="ADDRESS", default=None,
              help="Run on Dask: tcp://HOST:PORT of a running scheduler, or local:N for a "
                   "loopback cluster of N processes (needs ldpcmarg[dask]).")
@click.option("--cluster-timeout", type=float, default=10.0, show_default=True,
              metavar="SECONDS", help="Give up connecting to the --cluster scheduler after this.")
@click.option("--chunk-frames", type=int, default=None, callback=_positive("--chunk-frames"),
              help="Frames per work chunk [default: about 2^19 bits]; part of the run identity.")
@click.option("--random-codewords", is_flag=True,
              help="Send random codewords through the encoder instead of the all-zero word.")
@click.option("--confidence", type=float, default=0.95, show_default=True,
              help="Level of the reported confidence intervals.")
@click.option("--store", "store_path", type=click.Path(dir_okay=False), default=None,
              help="SQLite results store; re-running the command continues it.")
@click.option("--json", "json_path", type=click.Path(dir_okay=False), default=None,
              help="Write the curve as JSON.")
@click.option("--csv", "csv_path", type=click.Path(dir_okay=False), default=None,
              help="Write the curve as CSV.")
@click.option("--plot", "plot_path", type=click.Path(dir_okay=False), default=None,
              help="Write a BER/FER figure (.png, .svg or .pdf).")
@click.option("--force", is_flag=True,
              help="Overwrite existing --json, --csv and --plot files.")
@click.option("-q", "--quiet", is_flag=True, help="No progress lines.")
@link_options
def command(code, decoders, channel, ebn0, esn0, param_grid, frame_errors, max_frames,
            time_budget, fer_floor, seed, workers, cluster, cluster_timeout, chunk_frames,
            random_codewords, confidence, store_path, json_path, csv_path, plot_path, force,
            quiet, modulation, fading, puncture, shorten, quantize, interleaver):
    """Simulate BER and FER of CODE (a shipped name or a matrix file) over an SNR grid.

    \b
    Example:
      ldpcmarg simulate peg-504-3-6 -d sum-product -d min-sum:alpha=0.8 \\
          --ebn0 1:0.5:3 --frame-errors 50 --store peg.sqlite --json peg.json

    Every decoder decodes the same frames. Counts depend only on the seed,
    the chunk size and the stopping rule, not on the number of workers;
    re-running the same command with --store continues where it stopped, and
    a higher --frame-errors or new SNR points reuse the stored chunks.
    FER intervals are Clopper-Pearson; BER intervals treat the frame as the
    sampling unit (bit errors come in bursts).
    """
    from ..engine.simulate import StopRule, parse_grid, simulate
    from ..engine.store import Store

    # ---- validate everything before touching the store
    if seed < 0:
        raise InputError(f"--seed must be >= 0; got {seed}.")
    if not 0 < confidence < 1:
        raise InputError(f"--confidence must be in (0, 1); got {confidence}.")
    if channel == "awgn":
        if param_grid is not None:
            raise InputError("--param is for --channel bsc/bec; use --ebn0 or --esn0 for AWGN.")
        if (ebn0 is None) == (esn0 is None):
            raise InputError("Give exactly one of --ebn0 GRID or --esn0 GRID.")
        snr_kind = "ebn0_db" if ebn0 is not None else "esn0_db"
        grid = parse_grid(ebn0 if ebn0 is not None else esn0,
                          "--ebn0" if ebn0 is not None else "--esn0")
    else:
        if ebn0 is not None or esn0 is not None:
            raise InputError(
                f"--ebn0/--esn0 are for AWGN; give --param GRID for --channel {channel}.")
        if param_grid is None:
            what = "crossover probability p" if channel == "bsc" else "erasure probability epsilon"
            raise InputError(f"--channel {channel} needs --param GRID (the {what}).")
        snr_kind = "p" if channel == "bsc" else "epsilon"
        grid = parse_grid(param_grid, "--param")
    stop = StopRule(frame_errors=frame_errors, max_frames=max_frames, time_budget=time_budget,
                    fer_floor=fer_floor)
    if plot_path is not None:
        from ..plots.curves import check_figure_path

        check_figure_path(plot_path)
    outputs = Outputs(force)
    outputs.protect(store_path, f"the store --store {store_path}", store=True)
    outputs.protect_if_file(code, f"the code file {code}")
    for f in link_input_files(modulation, puncture):
        outputs.protect_if_file(f, f"the link input file {f}")
    outputs.add(json_path, "--json")
    outputs.add(csv_path, "--csv")
    outputs.add(plot_path, "--plot")
    outputs.check()
    code_obj = _load_code(code)
    # decoders and SNR values are checked by simulate() before it writes anything;
    # check them here too so that a bad spec never opens the store
    from ..decoders.base import make_decoder
    from ..engine.simulate import SNR_KINDS, _point_channel

    for spec in decoders:
        make_decoder(spec, code_obj)
    link = build_cli_link(code_obj, modulation=modulation, fading=fading, puncture=puncture,
                          shorten=shorten, quantize=quantize, interleaver=interleaver,
                          channel=channel)
    for v in grid:
        _point_channel(SNR_KINDS[snr_kind], snr_kind, v, code_obj.rate)
    from ..engine.simulate import default_chunk_frames, require_chunk_memory

    # a chunk too large for memory is refused before the store is opened
    largest_chunk = min(chunk_frames or default_chunk_frames(code_obj.n), max_frames)
    require_chunk_memory(largest_chunk, code_obj, random_codewords=random_codewords)

    executor = None
    if cluster and workers is not None:
        raise InputError("--workers is for the local process pool; with --cluster the "
                         "cluster's workers run the chunks. Give one of the two.")
    if cluster:
        from ..engine.executors import DaskExecutor

        if not cluster_timeout > 0:
            raise InputError(f"--cluster-timeout must be > 0; got {cluster_timeout}.")
        executor = DaskExecutor(cluster, connect_timeout=cluster_timeout)
    store = None
    progress = _Progress(not quiet)
    old_term = signal.signal(signal.SIGTERM, _terminate)  # SIGTERM stops as cleanly as Ctrl-C
    try:
        if store_path is not None:
            store = Store.open_writer(store_path, code_obj)
        res = simulate(code_obj, list(decoders), grid, snr_kind=snr_kind, seed=seed, stop=stop,
                       chunk_frames=chunk_frames, random_codewords=random_codewords,
                       workers=workers, executor=executor, store=store, progress=progress,
                       confidence=confidence, link=link)
    except KeyboardInterrupt as exc:
        if store is not None and not isinstance(exc, RunInterrupted):
            # the CLI prints this message as the one line of the interruption
            raise RunInterrupted(f"Interrupted; finished chunks are kept in {store_path}. Run "
                                 "the same command again to continue.") from exc
        raise
    finally:
        progress.close()
        signal.signal(signal.SIGTERM, old_term)
        if store is not None:
            store.close()
        if executor is not None:
            executor.close(abort=True)
    click.echo(f"code {code_obj.name}: n={code_obj.n} k={code_obj.k} rate={code_obj.rate:.4f}; "
               f"channel {res.channel['kind']} ({res.channel['codewords']} codewords"
               + (f"; {link.label()}" if link is not None else "") + "); "
               f"seed {seed}; {res.settings['executor']} x{res.settings['workers']}")
    click.echo(res.table())
    if json_path:
        res.write_json(json_path)
    if csv_path:
        res.write_csv(csv_path)
    if plot_path:
        from ..plots.curves import curves_from_sweep, plot_curves

        plot_curves(curves_from_sweep(res), plot_path)
