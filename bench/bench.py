"""sdrx benchmark: real-time factors and peak memory, measured side by side in one run.

Run with ``make bench``. It synthesizes its own captures (2.4 MS/s ci16_le I/Q,
one AM station), then times whole processes, alternating the commands so
that drift of the machine's speed hits all of them alike:

- ``sdrx receive`` fast path (default chain) on the 20 s capture, and on a
  capture six times longer (peak memory must stay flat);
- ``sdrx receive --path exact`` on the 20 s capture;
- both paths again with a chain whose ``[frontend]`` gives a noise figure, so
  that the receiver adds the front end's thermal noise at the full 2.4 MS/s
  (the cost of the noise source);
- the plain whole-file pipeline of ``bench/baseline.py``, on the capture and
  on one half as long;
- ``sdrx receive`` fast path with the noise blanker on (``[blanker] enabled``),
  and, in this process, the blanker stage alone on 2.4 MS/s I/Q with ten
  stations and 30 pulses/s, and the auto notch alone at the channel rate
  (CPU seconds per capture second).

- ``sdrx band`` on a capture with a carrier on each of the 117 channels from
  540 to 1700 kHz (every station, ten, one beside ``sdrx receive``), 10 s and
  20 s long (``bench_band``; ``--band-only`` times only these).

Steady-state speeds come from two lengths of capture (the extra capture
seconds over the extra wall time), which leaves out the fixed start-up of a
process (Python and scipy imports, about a second).

Figures are medians over the runs; ratios are taken run by run, then the
median. Nothing here is a pass/fail test; the targets are printed beside the
figures.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
SCENARIO = """
[capture]
kind = "iq"
rate = "2.4M"
center = "1.2M"
datatype = "ci16_le"
seconds = {seconds}
noise_dbfs_per_hz = -130
seed = 7

[[station]]
name = "Bench Station"
frequency = "1M"
level_dbfs = -20
depth = 0.3
[station.program]
kind = "tone"
frequency = "1k"
"""


NOISY_CHAIN = """# the default chain with a front end: thermal noise added at the capture rate
[frontend]
full_scale_dbm = -10
noise_figure_db = 10
"""


def timed(cmd) -> tuple:
    """Run a command; return (wall seconds, peak RSS in MB)."""
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, ru = os.wait4(p.pid, 0)
    wall = time.perf_counter() - t0
    if os.waitstatus_to_exitcode(status) != 0:
        err = p.stderr.read().decode(errors="replace")
        raise SystemExit(f"benchmark command failed: {' '.join(map(str, cmd))}\n{err}")
    p.stderr.close()
    return wall, ru.ru_maxrss / 1024.0


def make_captures(work: Path, seconds: float, factor: int) -> tuple:
    sdrx = [sys.executable, "-m", "sdrx"]
    scen = work / "bench.toml"
    scen.write_text(SCENARIO.format(seconds=seconds))
    short = work / "short.sigmf-meta"
    subprocess.run(sdrx + ["synth", str(scen), "-o", str(short), "--quiet"], check=True, stdout=subprocess.DEVNULL)
    half = work / "half.sigmf-meta"
    subprocess.run(sdrx + ["synth", str(scen), "-o", str(half), "--quiet", "--seconds", str(seconds / 2)],
                   check=True, stdout=subprocess.DEVNULL)
    # the long capture: the same samples repeated, streamed file to file
    long_meta = work / "long.sigmf-meta"
    shutil.copyfile(short, long_meta)
    with open(work / "long.sigmf-data", "wb") as out:
        for _ in range(factor):
            with open(work / "short.sigmf-data", "rb") as src:
                shutil.copyfileobj(src, out, 1 << 24)
    import json

    meta = json.loads(long_meta.read_text())
    meta["global"].pop("core:sha512", None)
    long_meta.write_text(json.dumps(meta, indent=2))
    return short, long_meta, half


def stage_costs(seconds: float = 10.0) -> dict:
    """CPU seconds per capture second of the blanker (2.4 MS/s I/Q) and of the auto notch (96 kHz)."""
    import numpy as np

    from sdrx.chain.spec import BlankerSpec, NotchSpec
    from sdrx.dsp.blanker import NoiseBlanker
    from sdrx.dsp.notch import HeterodyneNotch

    rng = np.random.default_rng(7)
    fs = 2.4e6
    n = int(seconds * fs)
    k = np.arange(n)
    x = np.zeros(n, np.complex64)
    for f in rng.uniform(-1.1e6, 1.1e6, 10):
        x += (0.03 * np.exp(2j * np.pi * (f / fs * k + rng.random()))).astype(np.complex64)
    x += (1e-4 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64)
    x[rng.integers(0, n, int(30 * seconds))] += 1.0
    nb = NoiseBlanker(BlankerSpec(enabled=True), fs)
    t0 = time.process_time()
    for i in range(0, n, 1 << 20):
        nb.process(x[i:i + (1 << 20)])
    nb.flush()
    blank = (time.process_time() - t0) / seconds
    fa = 96000.0
    m = int(seconds * fa)
    d = 0.5 + 0.1 * rng.standard_normal(m) + 0.2 * np.cos(2 * np.pi * 1500.0 * np.arange(m) / fa)
    nt = HeterodyneNotch(NotchSpec(auto=True), fa, (80.0, 6750.0))
    t0 = time.process_time()
    for i in range(0, m, 1 << 16):
        nt.process(d[i:i + (1 << 16)])
    nt.flush()
    notch = (time.process_time() - t0) / seconds
    return {"blanker": blank, "pulses": nb.pulses, "notch": notch}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=20.0, help="length of the short capture (s)")
    ap.add_argument("--factor", type=int, default=6, help="the long capture is this many times longer")
    ap.add_argument("--runs", type=int, default=3, help="runs of each command")
    ap.add_argument("--keep", type=Path, default=None, help="keep the captures in this folder")
    ap.add_argument("--band-runs", type=int, default=2, help="runs of each band command (0: leave band out)")
    ap.add_argument("--band-only", action="store_true", help="time only the band commands")
    args = ap.parse_args(argv)
    work = args.keep or Path(tempfile.mkdtemp(prefix="sdrx-bench-"))
    work.mkdir(parents=True, exist_ok=True)
    try:
        # byte-compile sdrx first, as any normal first run does (PYTHONDONTWRITEBYTECODE may be set
        # in some environments, which would otherwise make every run compile sdrx's modules again)
        import sdrx

        subprocess.run([sys.executable, "-m", "compileall", "-q", str(Path(sdrx.__file__).parent)],
                       check=True, stdout=subprocess.DEVNULL)
        if args.band_only:
            bench_band(work, args.band_runs)
            return 0
        print(f"synthesizing captures in {work} ...", flush=True)
        short, long_, half = make_captures(work, args.seconds, args.factor)
        sdrx = [sys.executable, "-m", "sdrx", "receive", "--tune", "1M", "--quiet", "--force"]
        noisy = work / "noisy.toml"
        noisy.write_text(NOISY_CHAIN)
        nb_chain = work / "blanker.toml"
        nb_chain.write_text("[blanker]\nenabled = true\n")
        cmds = {
            "fast_noise": sdrx + [str(short), "--chain", str(noisy), "-o", str(work / "fast_noise.wav")],
            "exact_noise": sdrx + [str(short), "--chain", str(noisy), "--path", "exact",
                                   "-o", str(work / "exact_noise.wav")],
            "fast": sdrx + [str(short), "-o", str(work / "fast.wav")],
            "exact": sdrx + [str(short), "--path", "exact", "-o", str(work / "exact.wav")],
            "baseline": [sys.executable, str(HERE / "baseline.py"), str(short), "1e6", str(work / "base.wav")],
            "fast_long": sdrx + [str(long_), "-o", str(work / "fast_long.wav")],
            "baseline_half": [sys.executable, str(HERE / "baseline.py"), str(half), "1e6", str(work / "base_half.wav")],
            "fast_blanker": sdrx + [str(short), "--chain", str(nb_chain), "-o", str(work / "fast_nb.wav")],
        }
        res = {k: [] for k in cmds}
        timed(cmds["fast"])  # warm-up: page cache, imports
        for _ in range(args.runs):
            for k, c in cmds.items():
                res[k].append(timed(c))
        med = {k: (statistics.median(w for w, _ in v), max(m for _, m in v)) for k, v in res.items()}
        dur = args.seconds
        ratio_base = statistics.median(b[0] / f[0] for b, f in zip(res["baseline"], res["fast"]))
        ratio_exact = statistics.median(e[0] / f[0] for e, f in zip(res["exact"], res["fast"]))
        mem_ratio = med["fast_long"][1] / med["fast"][1]
        # steady-state speed: the long run's extra capture seconds over its extra wall time (paired runs),
        # which leaves out the fixed start-up of the process (interpreter and scipy imports)
        extra = dur * (args.factor - 1)
        steady = statistics.median(extra / (lg[0] - sh[0]) for lg, sh in zip(res["fast_long"], res["fast"]))
        startup = statistics.median(sh[0] - dur / (extra / (lg[0] - sh[0]))
                                    for lg, sh in zip(res["fast_long"], res["fast"]))
        print()
        print(f"capture: 2.4 MS/s ci16_le I/Q, one AM station, {dur:g} s (long: {dur * args.factor:g} s); "
              f"{args.runs} runs each, whole processes, medians")
        print(f"{'run':34s} {'wall s':>8s} {'x real time':>12s} {'peak MB':>9s}   target")
        rows = [
            ("fast path, default chain", "fast", dur, ">= 40x real time, <= 300 MB"),
            ("exact path, default chain", "exact", dur, ">= 5x real time"),
            ("fast path, with thermal noise", "fast_noise", dur, ""),
            ("exact path, with thermal noise", "exact_noise", dur, ""),
            ("plain whole-file pipeline", "baseline", dur, ""),
            (f"fast path, capture x{args.factor}", "fast_long", dur * args.factor, "peak MB within 10 % of fast"),
            ("fast path, noise blanker on", "fast_blanker", dur, ""),
        ]
        for label, k, d, target in rows:
            w, m = med[k]
            print(f"{label:34s} {w:8.2f} {d / w:12.1f} {m:9.1f}   {target}")
        print()
        print(f"plain pipeline / fast path (wall, paired):  {ratio_base:6.1f}x   target >= 10x")
        print(f"exact path / fast path (wall, paired):      {ratio_exact:6.1f}x")
        for k in ("fast", "exact"):
            extra_s = statistics.median(n[0] - c[0] for n, c in zip(res[f"{k}_noise"], res[k]))
            print(f"thermal noise, {k} path: +{extra_s:.2f} s wall for {dur:g} s of capture "
                  f"(+{1e3 * extra_s / dur:.0f} ms per capture second, paired)")
        print(f"peak memory, capture x{args.factor} / capture x1:     {mem_ratio:6.2f}    target <= 1.10")
        base_steady = statistics.median((dur / 2) / (b[0] - h[0]) for b, h in zip(res["baseline"], res["baseline_half"]))
        print(f"fast path steady-state speed:               {steady:6.1f}x real time   target >= 40x "
              f"(fixed start-up per process {startup:.2f} s)")
        print(f"plain pipeline steady-state speed:          {base_steady:6.1f}x real time")
        print(f"steady-state speed, fast path / plain:      {steady / base_steady:6.1f}x   target >= 10x")
        if args.band_runs:
            bench_band(work, args.band_runs)
        extra_nb = statistics.median((b[0] - f[0]) / dur for b, f in zip(res["fast_blanker"], res["fast"]))
        print(f"noise blanker, extra wall per capture s:    {extra_nb:6.3f} s (it runs in the front-end thread)")
        costs = stage_costs()
        print(f"noise blanker alone, 2.4 MS/s I/Q:          {costs['blanker']:6.3f} CPU s per capture s "
              f"({costs['pulses']} pulses blanked in 10 s)")
        print(f"auto notch alone, 96 kHz channel rate:      {costs['notch']:6.3f} CPU s per capture s")
    finally:
        if args.keep is None:
            shutil.rmtree(work, ignore_errors=True)
    return 0


def bench_band(work: Path, runs: int) -> None:
    """sdrx band on a carrier in every 10 kHz channel from 540 to 1700 kHz (117 stations), 10 s and 20 s."""
    sys.path.insert(0, str(HERE))
    from band_capture import make

    print(f"\nsynthesizing the band captures (117 stations, 2.4 MS/s ci16_le) in {work} ...", flush=True)
    short, long_ = work / "band10.sigmf-meta", work / "band20.sigmf-meta"
    freqs = make(short, 10.0)
    make(long_, 20.0)
    ten = ",".join(f"{f / 1e3:g}k" for f in freqs[::12][:10])
    band = [sys.executable, "-m", "sdrx", "band", "--quiet", "--force"]
    cmds = {
        "all": band + [str(short), "-o", str(work / "b-all")],
        "all_long": band + [str(long_), "-o", str(work / "b-all-long")],
        "ten": band + [str(short), "--stations", ten, "-o", str(work / "b-ten")],
        "ten_long": band + [str(long_), "--stations", ten, "-o", str(work / "b-ten-long")],
        "one": band + [str(short), "--stations", "1000k", "-o", str(work / "b-one")],
        "one_long": band + [str(long_), "--stations", "1000k", "-o", str(work / "b-one-long")],
        "receive": [sys.executable, "-m", "sdrx", "receive", str(short), "--tune", "1000k", "--quiet", "--force",
                    "-o", str(work / "r-one.wav")],
        "receive_long": [sys.executable, "-m", "sdrx", "receive", str(long_), "--tune", "1000k", "--quiet",
                         "--force", "-o", str(work / "r-one-long.wav")],
    }
    res = {k: [] for k in cmds}
    timed(cmds["one"])  # warm-up
    for _ in range(runs):
        for k, c in cmds.items():
            res[k].append(timed(c))
    med = {k: (statistics.median(w for w, _ in v), max(m for _, m in v)) for k, v in res.items()}

    def steady(a, b) -> str:
        # the extra 10 s of capture over the median extra wall time of the paired runs; a long run no
        # slower than its short one means the machine's noise was larger than the difference
        extra = statistics.median(lg[0] - sh[0] for lg, sh in zip(res[b], res[a]))
        return f"{10.0 / extra:6.2f}x" if extra > 0 else "   n/a (noise over the difference)"

    print(f"\nband: {runs} runs each, whole processes, medians (2 cores shared with other work: noisy)")
    print(f"{'run':40s} {'wall s':>8s} {'x real time':>12s} {'peak MB':>9s}   target")
    rows = [("117 stations (--stations all), 10 s", "all", 10.0, ">= 3x real time, <= 1000 MB"),
            ("117 stations, 20 s capture", "all_long", 20.0, "peak MB flat"),
            ("10 stations, 10 s", "ten", 10.0, ">= 15x real time"),
            ("10 stations, 20 s capture", "ten_long", 20.0, ""),
            ("1 station (band), 10 s", "one", 10.0, "no slower than receive"),
            ("1 station (receive), 10 s", "receive", 10.0, "")]
    for label, k, d, target in rows:
        w, m = med[k]
        print(f"{label:40s} {w:8.2f} {d / w:12.2f} {m:9.1f}   {target}")
    ratio = statistics.median(b[0] / r[0] for b, r in zip(res["one"], res["receive"]))
    print(f"1 station, band / receive (wall, paired):    {ratio:6.2f}    target <= 1.0")
    print(f"117 stations steady-state speed:             {steady('all', 'all_long')} real time")
    print(f"10 stations steady-state speed:              {steady('ten', 'ten_long')} real time")
    print(f"1 station steady-state speed, band / receive: {steady('one', 'one_long')} / "
          f"{steady('receive', 'receive_long').strip()} real time (band also draws the spectrogram and the page)")
    print(f"peak memory, 117 stations, 20 s / 10 s:      {med['all_long'][1] / med['all'][1]:6.2f}    target <= 1.10")


if __name__ == "__main__":
    sys.exit(main())
