"""Streaming runner: capture reader -> receiver chain -> audio writer (+ run summary).

Examples
--------
The whole job in one call (see :func:`receive`)::

    summary = receive("coast.sigmf-meta", 1130e3, "medium", "out.wav", summary_path="out.json")
"""

from __future__ import annotations

import json
import math
from pathlib import Path

from .chain import design_chain
from .chain.spec import full_scale_override
from .errors import OutputError, ParameterError
from .fileio import atomic_path, check_free_space, check_output, same_file
from .fileset import OutputSet
from .limits import MAX_IF_RATE_HZ, MAX_RF_HZ, check_range
from .receiver import PATHS, Receiver
from .units import parse_frequency

__all__ = ["receive", "Receiver", "run_receiver", "write_json", "json_text", "spec_files", "levels_dbm"]

DEFAULT_BLOCK = 1 << 20


def json_text(obj) -> str:
    """JSON text of a summary: sorted keys, fixed layout (same content, same bytes); non-finite numbers as null.

    Examples
    --------
    >>> " ".join(json_text({"b": float("inf"), "a": 1}).split())
    '{ "a": 1, "b": null }'
    """
    return json.dumps(_finite(obj), indent=2, sort_keys=True, allow_nan=False) + "\n"


def _finite(obj):
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_finite(v) for v in obj]
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def write_json(path, obj, *, force: bool = True, inputs=()) -> None:
    """Write JSON atomically (see :func:`json_text`)."""
    p = check_output(path, inputs=inputs, force=force, option="--summary")
    with atomic_path(p) as tmp:
        tmp.write_text(json_text(obj))


def run_receiver(reader, rx: Receiver, *, first: int, count: int, block_size: int = DEFAULT_BLOCK,
                 sink=None, progress=None) -> int:
    """Feed ``count`` samples from ``reader`` (starting at ``first``) through ``rx``.

    Each audio block goes to ``sink(block)``; returns the number of audio
    samples produced.
    """
    fs = reader.info.fs
    done = 0
    n_audio = 0
    try:
        for block in _prefetch(reader.blocks(block_size, start_s=first / fs, duration_s=count / fs)):
            a = rx.process(block)
            done += len(block)
            if len(a):
                n_audio += len(a)
                if sink is not None:
                    sink(a)
            if progress is not None:
                progress(done, count)
        a = rx.flush()
    finally:
        rx.close()
    n_audio += len(a)
    if sink is not None and len(a):
        sink(a)
    if progress is not None:
        progress(count, count)
    return n_audio


def _prefetch(blocks, depth: int = 2):
    """Iterate over ``blocks`` with the next ones read ahead in a thread (file reads and
    sample conversion release the GIL, so reading overlaps the processing). Exceptions
    from the reader are raised here, in order."""
    import queue
    import threading

    q: queue.Queue = queue.Queue(maxsize=depth)
    stop = threading.Event()
    end = object()

    def run():
        try:
            for b in blocks:
                if stop.is_set():
                    return
                q.put((b, None))
            q.put((end, None))
        except BaseException as exc:  # handed to the consumer
            q.put((None, exc))

    t = threading.Thread(target=run, name="sdrx-read", daemon=True)
    t.start()
    try:
        while True:
            b, exc = q.get()
            if exc is not None:
                raise exc
            if b is end:
                return
            yield b
    finally:
        stop.set()
        while t.is_alive():
            try:
                q.get_nowait()
            except queue.Empty:
                t.join(0.01)


def receive(capture, tune_hz, chain="medium", out=None, *, summary_path=None, path: str = "fast",
            start_s=0.0, duration_s=None, float_output: bool = False, force: bool = False,
            progress=None, datatype=None, fs=None, center_hz=None, block_size=None,
            if_rate_hz=None, correct=None, ppm=None, spacing_hz=10e3, full_scale_dbm=None) -> dict:
    """Receive one station from a capture through a chain; write the audio.

    Parameters
    ----------
    capture : str, Path or CaptureReader
        Capture file (WAV/RF64/W64, SigMF, or raw with ``datatype``/``fs``).
    tune_hz : float or str
        The station's carrier frequency ("1130k").
    chain : preset name, TOML path, mapping, ChainSpec or ChainDesign
    out : str or Path
        Output WAV (16-bit PCM, or float with ``float_output``).
    summary_path : str or Path, optional
        Where to write the run summary JSON.
    path : {"fast", "exact"}
    start_s, duration_s : float or str
        Excerpt.
    force : bool
        Replace existing outputs.
    progress : callable, optional
        ``progress(done, total)`` in capture samples.
    datatype, fs, center_hz
        For raw files and I/Q WAV (see :func:`sdrx.capture.open_capture`).
    if_rate_hz : float, optional
        Exact path: IF sample rate (default automatic).
    correct : str, sequence of str or CorrectionPlan, optional
        Capture corrections (``--correct``: dc, iq, clock, all, none), estimated
        over the excerpt; or a plan already made (:func:`sdrx.capture.correct.plan_corrections`).
    ppm : float, optional
        ``--ppm``: the clock error to undo instead of estimating it.
    spacing_hz : float or str
        Channel spacing ("9k", "10k"): the adjacent channels of the checks, and the grid of
        broadcast carriers the clock estimate uses.
    full_scale_dbm : float or str, optional
        Antenna power of a full-scale carrier in this capture (``--full-scale-dbm``);
        overrides the spec's ``frontend.full_scale_dbm``.

    Returns
    -------
    dict
        The run summary (also written to ``summary_path``).

    Raises
    ------
    SdrxError
        Any bad input, before anything is written.
    """
    from .capture import AudioWriter, open_capture

    if path not in PATHS:
        raise ParameterError(f"--path {path!r}: choose one of {', '.join(PATHS)}")
    from .capture.correct import CorrectionPlan, corrected_reader, parse_correct, plan_corrections

    reader = capture if hasattr(capture, "blocks") else open_capture(capture, datatype=datatype, fs=fs, center_hz=center_hz)
    info = reader.info
    inputs = [info.path, info.data_path] + spec_files(chain)
    if out is None:
        raise ParameterError("-o: an output WAV path is required")
    out = check_output(out, inputs=inputs, force=force)
    if summary_path is not None:
        summary_path = check_output(summary_path, inputs=inputs + [out], force=force, option="--summary")
        if same_file(summary_path, out):
            raise ParameterError(f"--summary {summary_path}: is the output WAV; name another file")
    tune = check_range(parse_frequency(tune_hz, "--tune"), "--tune", 0, MAX_RF_HZ, low_open=True, unit="Hz")
    design = design_chain(chain)
    first, _ = reader.sample_range(start_s, duration_s)   # a bad excerpt fails before the estimate
    if_rate = None if if_rate_hz is None else parse_frequency(if_rate_hz, "--if-rate")
    if if_rate is not None:
        check_range(if_rate, "--if-rate", 0, MAX_IF_RATE_HZ, low_open=True, unit="Hz")
    if if_rate is not None and path != "exact":
        raise ParameterError("--if-rate: only the exact path has an IF sample rate (add --path exact)")
    spacing = parse_frequency(spacing_hz, "--spacing")
    fs_dbm = full_scale_override(full_scale_dbm)
    rx_kw = dict(path=path, if_rate_hz=if_rate, spacing_hz=spacing, full_scale_dbm=fs_dbm)
    corrections_asked = isinstance(correct, CorrectionPlan) or ppm is not None or bool(parse_correct(correct))
    if corrections_asked:
        # the tuning, the path and the front end are checked before the corrections' estimation pass
        Receiver(design, info, tune, first_sample=first, **rx_kw).close()
    if isinstance(correct, CorrectionPlan):
        if ppm is not None:
            raise ParameterError("--ppm: already part of the correction plan given")
        plan = correct
    else:
        plan = plan_corrections(reader, correct, ppm=ppm, spacing_hz=spacing, start_s=start_s,
                                duration_s=duration_s)
    # the corrected capture has the recorded rate, centre and band (only its length differs)
    reader = corrected_reader(reader, plan)
    info = reader.info
    first, count = reader.sample_range(start_s, duration_s)
    rx = Receiver(design, info, tune, first_sample=first, **rx_kw)
    audio_fs = rx.audio_fs
    expected = int(math.floor(count * audio_fs / info.fs + 1e-9))
    check_free_space(out, expected * (4 if float_output else 2))
    # one set: the summary is complete before anything is renamed; the WAV (-o) appears last
    with OutputSet(out) as outputs:
        with AudioWriter(out, audio_fs, float_output=float_output, expected_samples=expected, force=force,
                         inputs=inputs, outputs=outputs) as writer:
            n_audio = run_receiver(reader, rx, first=first, count=count,
                                   block_size=block_size or DEFAULT_BLOCK, sink=writer.write, progress=progress)
            clipped = writer.clipped
        summary = _summary(design, rx, info, tune, path, first, count, out, n_audio, float_output, clipped, plan)
        if summary_path is not None:
            tmp = outputs.add(summary_path)
            try:
                tmp.write_text(json_text(summary))
            except OSError as exc:
                raise OutputError(f"--summary {summary_path}: cannot write ({exc.strerror})") from None
    return summary


def spec_files(chain) -> list:
    """The chain spec file named by ``chain`` (a path that exists), as a list of inputs; [] for presets."""
    if isinstance(chain, (str, Path)):
        try:
            p = Path(chain)
            if p.is_file():
                return [p]
        except OSError:
            pass
    return []


def _summary(design, rx, info, tune, path, first, count, out, n_audio, float_output, clipped, plan) -> dict:
    audio_fs = rx.audio_fs
    st = rx.stats()
    summary = {
        "tune_hz": tune,
        "lo_hz": design.lo_hz(tune),
        "if_hz": design.if_hz,
        "image_hz": design.image_hz(tune),
        "path": path,
        "chain": design.name,
        "capture": {
            "path": str(info.path),
            "rate_hz": info.fs,
            "center_hz": info.center_hz,
            "kind": info.kind,
            "seconds": info.seconds,
            "start_s": first / info.fs,
            "duration_s": count / info.fs,
        },
        "output": {"path": str(out), "rate_hz": audio_fs, "seconds": n_audio / audio_fs,
                   "samples": n_audio, "format": "float32" if float_output else "pcm16"},
        "carrier_dbfs": _round(st["carrier_dbfs"]),
        "full_scale_dbm": rx.full_scale_dbm,
        "carrier_dbm": levels_dbm(st["carrier_dbfs"], rx.full_scale_dbm),
        "thermal_noise": _noise_summary(rx),
        "agc_gain_db": _round(st["agc_gain_db"]),
        "clipped_samples": int(clipped),
        "checks": rx.checks,
        "corrections": plan.to_json(),
        "warnings": list(plan.warnings) + list(rx.warnings),
    }
    summary.update(rx.stage_stats())   # blanker / notch / carrier_loop, each when that stage is on
    if path == "exact":
        summary["if_rate_hz"] = rx.front.fs_if
    if clipped and float_output:
        summary["warnings"].append(f"{clipped} audio samples exceed full scale (kept as they are in the float WAV)")
    elif clipped:
        summary["warnings"].append(f"{clipped} audio sample{'s' if clipped != 1 else ''} clipped at full scale")
    return summary


def levels_dbm(levels_dbfs: dict, full_scale_dbm):
    """Levels in dBm (dBFS + the full scale's dBm, rounded to 0.1 mdB), or None when the scale is unknown.

    Examples
    --------
    >>> levels_dbm({"mean": -20.0, "min": None}, -10.0), levels_dbm({"mean": -20.0}, None)
    ({'mean': -30.0, 'min': None}, None)
    """
    if full_scale_dbm is None:
        return None
    return _round({k: None if v is None else v + full_scale_dbm for k, v in levels_dbfs.items()})


def _noise_summary(rx):
    """What thermal noise the front end added (None when the spec has no noise figure)."""
    from .dsp.thermal import kt0_dbm_per_hz

    if rx.noise is None:
        return None
    fe = rx.design.frontend
    return {"noise_figure_db": fe.noise_figure_db, "added": "F*k*T0 per Hz (matched source at 290 K)",
            "kt0_dbm_per_hz": round(kt0_dbm_per_hz(), 4),
            "density_dbm_per_hz": round(kt0_dbm_per_hz() + fe.noise_figure_db, 4),
            "density_dbfs_per_hz": round(rx.noise.density_dbfs_per_hz, 4), "seed": fe.seed}


def _round(d: dict) -> dict:
    return {k: (None if v is None or not math.isfinite(v) else round(float(v), 4)) for k, v in d.items()}
