"""One unit of band work: every station of one capture over one segment, in one pass.

:func:`run_segment` opens the capture, feeds ``[warm, ...)`` through a
:class:`~sdrx.receiver.multi.MultiReceiver`, keeps each station's audio for
``[start, end)`` (encoded as it will be stored: 16-bit PCM or 32-bit float
codes), the carrier level of each 10 ms window in the segment, the AGC gain
range after the overlap, the clipped-sample count and the warnings, and the
spectrogram columns of the segment. The job and its result are plain data,
so the same function runs in this process or on a Dask worker.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path
from typing import Optional

import numpy as np

from ..capture.datatypes import parse_datatype
from .levels import level_rows
from .plan import Segment

__all__ = ["StationJob", "SegmentJob", "StationPart", "SegmentResult", "run_segment", "encode_audio",
           "PartsSink", "SETTLE_S", "part_path"]

SETTLE_S = 0.05        # as the receiver's summary: level statistics start 50 ms into the excerpt
_PCM16 = parse_datatype("ri16_le")
_FLOAT = parse_datatype("rf32_le")


def encode_audio(a: np.ndarray, float_output: bool) -> tuple:
    """Audio in [-1, 1] -> (codes as stored, values clipped or beyond full scale), as the audio writer does."""
    flat = np.ascontiguousarray(np.asarray(a, dtype=np.float64)).reshape(-1)
    if float_output:
        return _FLOAT.encode(flat)[0], int(np.count_nonzero(np.abs(flat) > 1.0))
    return _PCM16.encode(flat)


@dataclass(frozen=True)
class StationJob:
    """A station of a band run: tuning and chain design (picklable)."""

    tune_hz: float
    design: object


@dataclass(frozen=True)
class SegmentJob:
    """Everything a worker needs for one segment of one capture.

    ``capture`` and ``open_kwargs`` open the capture (a path the worker
    sees); ``first``/``count`` is the excerpt; ``parts_dir`` is where the
    worker writes each station's codes (None: the caller passes a sink);
    ``full_scale_dbm`` is the run's ``--full-scale-dbm`` (None: each spec's own).
    """

    capture_index: int
    capture: str
    open_kwargs: dict
    stations: tuple
    segment: Segment
    first: int
    count: int
    float_output: bool
    spectrogram: object = None
    parts_dir: Optional[str] = None
    corrections: object = None      # the capture's CorrectionPlan, estimated once by the client
    full_scale_dbm: Optional[float] = None


@dataclass
class StationPart:
    """One station's share of a segment's results."""

    samples: int = 0
    clipped: int = 0
    levels: object = None       # LevelRows: per-second partial rows of the 10 ms carrier levels
    agc_gain_db: tuple = (None, None)
    warnings: tuple = ()


@dataclass
class SegmentResult:
    """What a segment sends back to the client (small: no audio)."""

    capture_index: int
    index: int
    stations: list
    spectrogram: Optional[np.ndarray] = None


def part_path(parts_dir, capture_index: int, segment: int, station: int) -> Path:
    """Where a worker leaves one station's codes of one segment."""
    return Path(parts_dir) / f"c{capture_index:04d}" / f"s{segment:07d}" / f"{station:04d}.codes"


class PartsSink:
    """Writes each station's codes of a segment to its own file under ``parts_dir`` (shared storage)."""

    def __init__(self, parts_dir, capture_index: int, segment: int, n_stations: int):
        self.paths = [part_path(parts_dir, capture_index, segment, i) for i in range(n_stations)]
        self.paths[0].parent.mkdir(parents=True, exist_ok=True)
        self.files = [open(p, "wb") for p in self.paths]

    def write(self, i: int, codes: np.ndarray) -> None:
        self.files[i].write(memoryview(np.ascontiguousarray(codes)).cast("B"))

    def close(self) -> None:
        for f in self.files:
            f.close()


class _Cut:
    """Drops the overlap's audio and keeps exactly the segment's."""

    def __init__(self, drop: int, keep: Optional[int]):
        self.drop = drop
        self.keep = keep      # None: everything after the drop (the excerpt's last segment)
        self.kept = 0

    def __call__(self, a: np.ndarray) -> np.ndarray:
        if self.drop:
            k = min(self.drop, len(a))
            a = a[k:]
            self.drop -= k
        if self.keep is not None:
            a = a[:max(0, self.keep - self.kept)]
        self.kept += len(a)
        return a

    @property
    def full(self) -> bool:
        return self.keep is not None and self.drop == 0 and self.kept >= self.keep


def _audio_samples(n_capture: int, rx) -> int:
    return int(Fraction(n_capture) * Fraction(rx.audio_fs).limit_denominator(1000)
               / Fraction(rx.info.fs).limit_denominator(1000))


def _block_size(n_channels: int) -> int:
    # about 64 MB of channel samples per block, whatever the number of stations
    return 1 << 20 if n_channels <= 8 else 1 << 18


def run_segment(job: SegmentJob, sink=None, progress=None, on_spectrogram=None) -> SegmentResult:
    """Receive every station of ``job`` over its segment.

    Parameters
    ----------
    job : SegmentJob
    sink : object with ``write(station_index, codes)``, optional
        Where the codes go; by default a :class:`PartsSink` under
        ``job.parts_dir``.
    progress : callable, optional
        ``progress(samples)``: capture samples of the segment done so far.
    on_spectrogram : callable, optional
        ``on_spectrogram(db)``, once, with the segment's spectrogram columns as soon as they are
        complete (from the read-ahead thread, a block or so before the receiving ends; at the latest
        before this returns). Not called when the job has no spectrogram.

    Returns
    -------
    SegmentResult
    """
    from ..capture import open_capture
    from ..receiver.multi import MultiReceiver
    from ..run import _prefetch
    from .spectrogram import SpectrogramAccumulator

    seg = job.segment
    from ..capture.correct import corrected_reader

    # the corrections (estimated once for the capture, over the whole excerpt: the I/Q balance from the
    # whole band's statistics) stream on the capture's absolute grid, like the receivers' state
    reader = open_capture(job.capture, **job.open_kwargs)
    if job.corrections is not None:
        reader = corrected_reader(reader, job.corrections)
    info = reader.info
    fs = info.fs
    mr = MultiReceiver([(s.design, s.tune_hz) for s in job.stations], info, first_sample=seg.warm,
                       full_scale_dbm=job.full_scale_dbm)
    mr.restart_statistics_at(seg.start)
    cuts = [_Cut(_audio_samples(seg.start - seg.warm, rx),
                 None if seg.last else _audio_samples(seg.end - seg.start, rx)) for rx in mr.stations]
    own_sink = sink is None
    if own_sink:
        sink = PartsSink(job.parts_dir, job.capture_index, seg.index, len(job.stations))
    parts = [StationPart() for _ in job.stations]
    spec = SpectrogramAccumulator(job.spectrogram, seg.start, seg.end) if job.spectrogram is not None else None

    def emit(outs):
        for i, (a, cut) in enumerate(zip(outs, cuts)):
            a = cut(a)
            if len(a):
                codes, clipped = encode_audio(a, job.float_output)
                sink.write(i, codes)
                parts[i].samples += len(a)
                parts[i].clipped += clipped

    stop = job.first + job.count
    n_ch = sum(len(g.bank.tables) for g in mr.groups)
    told = _Once(on_spectrogram)
    pos = seg.warm
    try:
        blocks = reader.blocks(_block_size(n_ch), start_s=seg.warm / fs, duration_s=(stop - seg.warm) / fs)
        fed = _spectrogram_fed(blocks, spec, seg.warm, told)
        with contextlib.closing(_prefetch(fed)) as ahead:
            for block in ahead:
                pos += len(block)
                emit(mr.process(block))
                if progress is not None:
                    progress(min(seg.samples, max(0, pos - seg.start)))
                if cuts and all(c.full for c in cuts):
                    break
        emit(mr.flush())
    finally:
        mr.close()
        if own_sink:
            sink.close()
    if spec is not None:
        told(spec.db)
    for i, rx in enumerate(mr.stations):
        _statistics(parts[i], rx, job, seg)
    return SegmentResult(job.capture_index, seg.index, parts, None if spec is None else spec.db)


class _Once:
    """Calls ``fn(value)`` the first time only (``fn`` None: never)."""

    def __init__(self, fn):
        self.fn = fn
        self.called = False

    def __call__(self, value) -> None:
        if self.fn is not None and not self.called:
            self.called = True
            self.fn(value)


def _spectrogram_fed(blocks, spec, pos: int, complete: _Once):
    """The blocks, each fed to the spectrogram first (in the read-ahead thread, beside the receiving);
    ``complete(db)`` as soon as its last column is in.

    The receiving stops once every station's audio reaches the segment's end, which lies past the end of
    the segment's samples (the chains' delay), so every spectrogram column of the segment is complete
    then, whether or not the read-ahead has fed a block more.
    """
    for block in blocks:
        if spec is not None:
            spec.feed(block, pos)
            if spec.complete:
                complete(spec.db)
        pos += len(block)
        yield block


def _statistics(part: StationPart, rx, job: SegmentJob, seg: Segment) -> None:
    """Level windows of ``[start, end)``, AGC range and warnings of one station."""
    levels = rx.carrier_levels_dbfs(settle_s=0.0)          # 10 ms windows from the warm-up start
    win = Fraction(rx.backend.meter.n) * Fraction(rx.info.fs).limit_denominator(1000) / Fraction(rx.fs_ch).limit_denominator(1000)
    k0 = int((seg.start - seg.warm) / win)
    k1 = int(math.floor((seg.end - seg.warm) / win))
    first_window = int((seg.start - job.first) / win)
    skip = int(round(SETTLE_S * rx.fs_ch / rx.backend.meter.n)) if seg.start == job.first else 0
    part.levels = level_rows(levels[k0 + skip:k1], first_window + skip, int(round(rx.fs_ch / rx.backend.meter.n)))
    g = rx.stats()["agc_gain_db"]
    part.agc_gain_db = (g["min"], g["max"])
    part.warnings = tuple(rx.warnings)
