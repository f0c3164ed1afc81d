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
from .errors import OutputError, ParameterError
from .fileio import atomic_path, check_free_space, check_output, same_file
from .fileset import OutputSet
from .limits import MAX_IF_RATE_HZ, MAX_RF_HZ, check_range
from .receiver import PATHS, Receiver
from .units import parse_frequency

__all__ = ["receive", "Receiver", "run_receiver", "write_json", "json_text", "spec_files"]

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
            if_rate_hz=None) -> dict:
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
    first, count = reader.sample_range(start_s, duration_s)
    if_rate = None if if_rate_hz is None else parse_frequency(if_rate_hz, "--if-rate")
    if if_rate is not None:
        check_range(if_rate, "--if-rate", 0, MAX_IF_RATE_HZ, low_open=True, unit="Hz")
    if if_rate is not None and path != "exact":
        raise ParameterError("--if-rate: only the exact path has an IF sample rate (add --path exact)")
    rx = Receiver(design, info, tune, path=path, first_sample=first, if_rate_hz=if_rate)
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
        summary = _summary(design, rx, info, tune, path, first, count, out, n_audio, float_output, clipped)
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


def _summary(design, rx, info, tune, path, first, count, out, n_audio, float_output, clipped) -> dict:
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
        "agc_gain_db": _round(st["agc_gain_db"]),
        "clipped_samples": int(clipped),
        "warnings": list(rx.warnings),
    }
    if path == "exact":
        summary["if_rate_hz"] = rx.front.fs_if
    if clipped and float_output:
        summary["warnings"].append(f"{clipped} audio samples exceed full scale (kept as they are in the float WAV)")
    elif clipped:
        summary["warnings"].append(f"{clipped} audio samples clipped at full scale")
    return summary


def _round(d: dict) -> dict:
    return {k: (None if v is None or not math.isfinite(v) else round(float(v), 4)) for k, v in d.items()}
