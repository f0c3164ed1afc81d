"""``band()``: every station of one or more captures, in segments, here or on a Dask cluster.

The steps, each a small function below:

1. open the captures, parse the chains and the station list, check ``-o DIR``;
2. with ``--stations all``, survey each capture (one job per capture);
3. plan each capture's segments (overlap on the whole capture's grid) and
   its spectrogram columns;
4. run one job per segment (:func:`sdrx.band.segment.run_segment`): in this
   process the codes go straight into the output WAVs; on workers they go to
   part files on shared storage and the client appends each segment to the
   WAVs as soon as every earlier segment of its capture is in;
5. draw each capture's spectrogram picture as soon as its columns are in
   (:mod:`sdrx.band.pictures`: a helper process, beside the receiving);
6. write band.json, log.csv and index.html, then commit the whole set.

A one-process run and a run on any number of workers compute the same
segments and assemble them in the same order, so their outputs are the same
bytes.
"""

from __future__ import annotations

import json
import math
import shutil
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import ParameterError
from ..fileio import same_file
from ..units import format_frequency, parse_frequency, parse_seconds
from .choices import parse_chains, parse_stations
from .outputs import MARKER, capture_folders, check_band_dir, output_set, station_name
from .plan import cut_period, grid_period, plan_segments, settle_time_s

__all__ = ["band", "DEFAULT_SEGMENT_S"]

DEFAULT_SEGMENT_S = 60.0
JSON_FILE, LOG_FILE, PAGE_FILE = "band.json", "log.csv", "index.html"

@dataclass
class _Capture:
    """One capture of the run: reader, excerpt, stations, segments."""

    index: int
    arg: str
    reader: object
    folder: str
    first: int
    count: int
    survey: object = None
    corrections: object = None     # the capture's CorrectionPlan (--correct, --ppm)
    stations: list = None          # [(tune_hz, spec_arg)]
    skipped: list = None           # [{"freq_hz", "reason"}]
    segments: list = None
    spectrogram: object = None
    rows: dict = None              # station name -> LevelRows (after the run)
    scales: dict = None            # station name -> full scale, dBm, or None (after the run)

    @property
    def info(self):
        return self.reader.info


def _survey_job(job):
    from ..analysis.survey import survey
    from ..capture import open_capture
    from ..capture.correct import corrected_reader

    path, kwargs, plan, spacing, start, duration = job
    reader = corrected_reader(open_capture(path, **kwargs), plan)
    return survey(reader, spacing_hz=spacing, start_s=start, duration_s=duration)


def _correct(caps, correct, ppm, spacing, start_s, duration_s) -> None:
    """Each capture's corrections (estimated over its excerpt, as receive does); its reader and excerpt
    from then on are the corrected capture's."""
    from ..capture.correct import corrected_reader, plan_corrections

    for c in caps:
        c.corrections = plan_corrections(c.reader, correct, ppm=ppm, spacing_hz=spacing, start_s=start_s,
                                         duration_s=duration_s)
        c.reader = corrected_reader(c.reader, c.corrections)
        c.first, c.count = c.reader.sample_range(start_s, duration_s)


def _open_captures(captures, kwargs, start_s, duration_s) -> list:
    from ..capture import open_capture

    if not captures:
        raise ParameterError("CAPTURE: give at least one capture file")
    out = []
    for i, arg in enumerate(captures):
        reader = open_capture(arg, **kwargs)
        for o in out:
            if same_file(o.info.path, reader.info.path):
                raise ParameterError(f"CAPTURE {arg}: given twice (also as {o.arg})")
        first, count = reader.sample_range(start_s, duration_s)
        out.append(_Capture(i, str(arg), reader, "", first, count))
    for c, name in zip(out, capture_folders([c.arg for c in out])):
        c.folder = name
    return out


def _designs(choice) -> dict:
    from ..chain import design_chain

    out = {}
    for spec in choice.specs:
        try:
            out[spec] = design_chain(spec)
        except ParameterError as exc:
            raise ParameterError(f"--chain {spec}: {exc}") from None
    return out


def _pick_stations(cap: _Capture, freqs, choice, designs, min_level, fs_dbm=None) -> None:
    """The stations of one capture: the list given, or the surveyed carriers (strong enough, receivable)."""
    from ..receiver import Receiver

    lo, hi = cap.info.band_hz
    cap.stations, cap.skipped = [], []
    if freqs is not None:
        for f in freqs:
            if not lo < f < hi:
                raise ParameterError(f"--stations {station_name(f)}: outside the band of {cap.arg} "
                                     f"({format_frequency(lo)} to {format_frequency(hi)})")
            spec = choice.spec_for(f)
            try:
                Receiver.check_station(designs[spec], cap.info, f, fs_dbm)
            except ParameterError as exc:
                raise ParameterError(f"--stations {station_name(f)} ({cap.arg}): {exc}") from None
            cap.stations.append((f, spec))
        return
    for c in sorted(cap.survey.carriers, key=lambda c: c.freq_hz):
        if min_level is not None and c.level_dbfs < min_level:
            cap.skipped.append({"freq_hz": c.freq_hz, "level_dbfs": round(c.level_dbfs, 2),
                                "reason": f"below --min-level {min_level:g} dBFS"})
            continue
        spec = choice.spec_for(c.freq_hz)
        try:
            Receiver.check_station(designs[spec], cap.info, c.freq_hz, fs_dbm)
        except ParameterError as exc:
            cap.skipped.append({"freq_hz": c.freq_hz, "level_dbfs": round(c.level_dbfs, 2), "reason": str(exc)})
            continue
        cap.stations.append((c.freq_hz, spec))


def _check_pairs(caps, choice) -> None:
    held = {f for c in caps for f, _ in c.stations}
    for f, spec in choice.per_station:
        if f not in held:
            raise ParameterError(f"--chain {station_name(f)}={spec}: no capture has a station at "
                                 f"{format_frequency(f)} (see --stations)")


def _plan(cap: _Capture, designs, segment_s, spacing_hz, fs_dbm=None) -> float:
    """Segments and spectrogram columns of one capture; returns its overlap, seconds."""
    from ..receiver import Receiver
    from .spectrogram import plan_spectrogram

    used = sorted({spec for _, spec in cap.stations})
    probes = [Receiver(designs[s], cap.info, next(f for f, sp in cap.stations if sp == s), full_scale_dbm=fs_dbm)
              for s in used]
    grid, cut = grid_period(probes), cut_period(probes)
    overlap = max((settle_time_s(designs[s]) for s in used), default=0.0)
    seg = None if not segment_s else segment_s
    cap.segments = plan_segments(cap.first, cap.count, cap.info.fs, seg, overlap, grid, cut)
    seg_n = cap.segments[0].samples if len(cap.segments) > 1 else None
    cap.spectrogram = plan_spectrogram(cap.info, cap.first, cap.count, spacing_hz, seg_n)
    return overlap


def _names(caps) -> dict:
    """Relative WAV path per (capture index, station index)."""
    out = {}
    for c in caps:
        for j, (f, _) in enumerate(c.stations):
            name = f"{station_name(f)}.wav"
            out[c.index, j] = f"{c.folder}/{name}" if c.folder else name
    return out


class _Streams:
    """The output WAVs being written (on temporary paths), one per station."""

    def __init__(self, caps, names, out, outputs, designs, float_output):
        from ..capture.wavio import WavStream

        self.streams = {}
        fmt = "float32" if float_output else "pcm16"
        try:
            for c in caps:
                for j, (f, spec) in enumerate(c.stations):
                    fa = designs[spec].audio.rate_hz
                    n = int(math.floor(c.count * fa / c.info.fs + 1e-9))
                    self.streams[c.index, j] = WavStream(Path(out) / names[c.index, j], fa, 1, fmt,
                                                         expected_frames=n, info={}, outputs=outputs)
        except BaseException:
            self.abort()
            raise
        self.dtype = {k: s.dtype for k, s in self.streams.items()}

    def sink(self, ci: int):
        streams = self.streams

        class _Sink:
            def write(self, j, codes):
                streams[ci, j].write_codes(codes)

        return _Sink()

    def append_parts(self, parts_dir, cap, seg_index) -> None:
        from .segment import part_path

        for j in range(len(cap.stations)):
            p = part_path(parts_dir, cap.index, seg_index, j)
            self.streams[cap.index, j].write_codes(np.fromfile(p, dtype=self.dtype[cap.index, j]))
            p.unlink()
        if cap.stations:
            shutil.rmtree(part_path(parts_dir, cap.index, seg_index, 0).parent, ignore_errors=True)

    def close(self) -> None:
        for s in self.streams.values():
            s.close()

    def abort(self) -> None:
        for s in self.streams.values():
            s.abort()


def band(captures, out_dir, *, stations="all", min_level_dbfs=None, chains=(), spacing_hz="10k", start_s=0.0,
         duration_s=None, segment_s=DEFAULT_SEGMENT_S, workers=None, scheduler=None, float_output: bool = False,
         force: bool = False, progress=None, datatype=None, fs=None, center_hz=None, work_dir=None,
         correct=None, ppm=None, full_scale_dbm=None) -> dict:
    """Receive every station of each capture; write the WAVs, band.json, log.csv and index.html.

    Parameters
    ----------
    captures : sequence of str or Path
        Capture files (as for ``sdrx receive``); workers must see the same paths.
    out_dir : str or Path
        The band folder (new, empty, or an earlier band run with ``force``).
    stations : "all" or str
        ``"all"``: every carrier the survey finds on the channel grid; or
        frequencies, ``"600k,880k"``.
    min_level_dbfs : float, optional
        With "all": leave out carriers weaker than this (survey level, dBFS).
    chains : sequence of str
        ``SPEC`` for every station and/or ``F=SPEC`` for one (default medium).
    spacing_hz : float or str
        Channel grid of the survey (9k or 10k).
    start_s, duration_s
        Excerpt of every capture.
    segment_s : float or None
        Length of a unit of work, seconds (None or 0: one per capture).
    workers : int, optional
        Local Dask worker processes (LocalCluster on 127.0.0.1).
    scheduler : str, optional
        Address of an existing Dask scheduler.
    float_output : bool
        32-bit float WAVs instead of 16-bit PCM.
    force : bool
        Replace an earlier band run in ``out_dir``.
    progress : callable, optional
        ``progress(done, total)`` in capture samples (advances per segment on workers).
    datatype, fs, center_hz
        For raw captures and I/Q WAV.
    work_dir : str or Path, optional
        Where workers leave segment parts (default: a hidden folder in ``out_dir``);
        shared storage that every worker and this process see under the same path.
    correct, ppm : optional
        Capture corrections (``--correct``, ``--ppm``), estimated once per capture over its
        excerpt and applied ahead of every station (as :func:`sdrx.run.receive` does).
    full_scale_dbm : float or str, optional
        ``--full-scale-dbm``: antenna power of a full-scale carrier in the captures, for every
        station (overrides each spec's ``frontend.full_scale_dbm``); band.json and log.csv then
        give the carrier levels in dBm beside dBFS (as they do when the spec gives it).

    Returns
    -------
    dict
        The content of band.json.

    Raises
    ------
    SdrxError
        Any bad input, before anything is written.
    """
    from ..parallel import check_workers

    check_workers(workers, scheduler)
    kwargs = {"datatype": datatype, "fs": fs, "center_hz": center_hz}
    caps = _open_captures(captures, kwargs, start_s, duration_s)
    inputs = [p for c in caps for p in (c.info.path, c.info.data_path)]
    old = check_band_dir(out_dir, [], inputs, force=force)
    freqs = parse_stations(stations)
    if min_level_dbfs is not None:
        if freqs is not None:
            raise ParameterError("--min-level: applies to --stations all (the surveyed carriers)")
        min_level_dbfs = float(min_level_dbfs)
        if not math.isfinite(min_level_dbfs):
            raise ParameterError(f"--min-level: must be a level in dBFS, got {min_level_dbfs!r}")
    spacing = parse_frequency(spacing_hz, "--spacing")
    if segment_s is not None:
        segment_s = parse_seconds(segment_s, "--segment")
    from ..chain.spec import full_scale_override

    fs_dbm = full_scale_override(full_scale_dbm)
    choice = parse_chains(chains)
    designs = _designs(choice)
    if work_dir is not None and not Path(work_dir).is_dir():
        raise ParameterError(f"--work-dir {work_dir}: not a folder")
    _correct(caps, correct, ppm, spacing, start_s, duration_s)
    if freqs is None:
        jobs = [(str(Path(c.arg).absolute()), kwargs, c.corrections, spacing, start_s, duration_s) for c in caps]
        for c, s in zip(caps, _run(_survey_job, jobs, workers, scheduler)):
            c.survey = s
    for c in caps:
        _pick_stations(c, freqs, choice, designs, min_level_dbfs, fs_dbm)
    _check_pairs(caps, choice)
    if not any(c.stations for c in caps):
        raise ParameterError("--stations all: the survey found no carrier to receive in "
                             + ", ".join(c.arg for c in caps) + "; name the stations with --stations F,F,...")
    overlap = max(_plan(c, designs, segment_s, spacing, fs_dbm) for c in caps)
    names = _names(caps)
    files = sorted(names.values()) + [JSON_FILE, LOG_FILE, PAGE_FILE, MARKER]
    check_band_dir(out_dir, files, inputs, force=force)
    out = Path(out_dir)
    with output_set(out, files, stale=old, streamed=set(names.values())) as (tmp, outputs), \
            _drawer(caps) as drawer:
        pictures = _pictures(caps, drawer)
        results = _receive_all(caps, kwargs, names, outputs, designs, float_output, workers, scheduler, progress,
                               out, work_dir, fs_dbm, pictures)
        summary = _summary(caps, names, designs, results, spacing, segment_s, overlap, float_output, fs_dbm)
        _write_reports(caps, tmp, summary, pictures)
        tmp[MARKER].write_text(json.dumps({"made_by": "sdrx band", "files": files}, indent=1) + "\n")
    return summary


def _drawer(caps):
    """The spectrogram pictures' drawer: a helper process when the run is long enough to pay for it."""
    from . import pictures

    return pictures.PictureDrawer(helper=sum(c.count for c in caps) >= pictures.HELPER_MIN_SAMPLES)


def _pictures(caps, drawer):
    """Each capture's picture, drawn as soon as all its segments' spectrogram columns are in."""
    from .pictures import BandPictures

    return BandPictures(drawer, {c.index: (len(c.segments), _picture_args(c)) for c in caps})


def _picture_args(c: _Capture) -> dict:
    sp = c.spectrogram
    return {"freqs_hz": sp.freqs_hz, "times_s": sp.times_s, "stations": [(f, station_name(f)) for f, _ in c.stations],
            "title": f"{Path(c.arg).name}: spectrogram, stations marked", "column_s": sp.column / sp.fs}


def _run(fn, jobs, workers, scheduler, **kw):
    from ..parallel import run_jobs

    return run_jobs(fn, jobs, workers=workers, scheduler=scheduler, **kw)


def _receive_all(caps, kwargs, names, outputs, designs, float_output, workers, scheduler, progress, out,
                 work_dir, fs_dbm, pictures) -> dict:
    """Run every segment; the WAVs are complete (on their temporary paths) when this returns, and every
    segment's spectrogram columns have gone to ``pictures``."""
    from .segment import SegmentJob, StationJob, run_segment

    local = workers is None and scheduler is None
    # absolute paths: a worker on another machine (or in another folder) sees the same shared storage
    parts_dir = None if local else Path(tempfile.mkdtemp(prefix=".sdrx-band-parts-", dir=work_dir or out)).absolute()
    jobs, weights = [], []
    for c in caps:
        st = tuple(StationJob(f, designs[spec]) for f, spec in c.stations)
        for s in c.segments:
            jobs.append(SegmentJob(c.index, str(Path(c.arg).absolute()), kwargs, st, s, c.first, c.count,
                                   float_output, c.spectrogram, None if parts_dir is None else str(parts_dir),
                                   c.corrections, full_scale_dbm=fs_dbm))
            weights.append(s.samples)
    streams = _Streams(caps, names, out, outputs, designs, float_output)
    results = {}
    pending = {c.index: 0 for c in caps}
    try:
        total = sum(weights)
        if local:
            done = [0]

            def fn(job):
                base = done[0]

                def sub(n, _base=base):
                    if progress is not None:
                        progress(min(total, _base + n), total)

                def seen(db, _c=job.capture_index, _s=job.segment.index):
                    pictures.add(_c, _s, db)

                r = run_segment(job, sink=streams.sink(job.capture_index), progress=sub, on_spectrogram=seen)
                done[0] += job.segment.samples
                return r

            def take(i, r):
                results[r.capture_index, r.index] = r

            _run(fn, jobs, None, None, weights=weights, progress=progress, on_result=take)
        else:
            def take(i, r):
                results[r.capture_index, r.index] = r
                pictures.add(r.capture_index, r.index, r.spectrogram)
                c = caps[r.capture_index]
                while (c.index, pending[c.index]) in results and pending[c.index] < len(c.segments):
                    streams.append_parts(parts_dir, c, pending[c.index])
                    pending[c.index] += 1

            _run(run_segment, jobs, workers, scheduler, weights=weights, progress=progress, on_result=take)
        streams.close()
    except BaseException:
        streams.abort()
        raise
    finally:
        if parts_dir is not None:
            shutil.rmtree(parts_dir, ignore_errors=True)
    return results


def _summary(caps, names, designs, results, spacing, segment_s, overlap, float_output, fs_dbm=None) -> dict:
    from ..chain.spec import spec_to_dict
    from ..receiver.receiver import station_full_scale
    from ..run import levels_dbm
    from .levels import Totals, merge_rows

    out_caps = []
    for c in caps:
        segs = [results[c.index, s.index] for s in c.segments]
        rows_all, scales = {}, {}
        st_out = []
        for j, (f, spec) in enumerate(c.stations):
            d = designs[spec]
            parts = [r.stations[j] for r in segs]
            rows = merge_rows([p.levels for p in parts])
            tot = Totals()
            tot.add(rows)
            rows_all[station_name(f)] = rows
            scales[station_name(f)] = scale = station_full_scale(d, fs_dbm)
            lo = [p.agc_gain_db[0] for p in parts if p.agc_gain_db[0] is not None]
            hi = [p.agc_gain_db[1] for p in parts if p.agc_gain_db[1] is not None]
            warnings = []
            for p in parts:
                for w in p.warnings:
                    if w not in warnings:
                        warnings.append(w)
            samples = sum(p.samples for p in parts)
            clipped = sum(p.clipped for p in parts)
            if clipped and float_output:
                warnings.append(f"{clipped} audio samples exceed full scale (kept as they are in the float WAV)")
            elif clipped:
                warnings.append(f"{clipped} audio samples clipped at full scale")
            level = None
            if c.survey is not None:
                level = next((round(x.level_dbfs, 2) for x in c.survey.carriers if x.freq_hz == f), None)
            st_out.append({
                "tune_hz": f, "file": names[c.index, j], "chain": d.name, "chain_arg": spec,
                "lo_hz": d.lo_hz(f), "if_hz": d.if_hz, "image_hz": d.image_hz(f), "path": "fast",
                "output": {"rate_hz": d.audio.rate_hz, "seconds": samples / d.audio.rate_hz, "samples": samples,
                           "format": "float32" if float_output else "pcm16"},
                "carrier_dbfs": tot.to_json(), "full_scale_dbm": scale,
                "carrier_dbm": levels_dbm(tot.to_json(), scale),
                "agc_gain_db": {"min": round(min(lo), 4) if lo else None, "max": round(max(hi), 4) if hi else None},
                "clipped_samples": clipped, "survey_level_dbfs": level, "warnings": warnings,
            })
        c.rows, c.scales = rows_all, scales
        out_caps.append({
            "capture": c.info.to_json(), "folder": c.folder, "start_s": c.first / c.info.fs,
            "duration_s": c.count / c.info.fs, "segments": len(c.segments),
            "survey": None if c.survey is None else {k: v for k, v in c.survey.to_json().items() if k != "carriers"},
            "corrections": c.corrections.to_json(),
            "skipped": c.skipped, "spectrogram": c.spectrogram.to_json(), "stations": st_out,
        })
    return {
        "made_by": "sdrx band", "spacing_hz": spacing,
        "segment_s": segment_s if segment_s else None, "overlap_s": round(overlap, 6),
        "chains": {spec: spec_to_dict(designs[spec].spec) for spec in designs},
        "captures": out_caps,
    }


def _write_reports(caps, tmp, summary, pictures) -> None:
    from .figures import level_svg
    from .levels import log_csv
    from .page import render_band_page

    tmp[JSON_FILE].write_text(json.dumps(summary, indent=1, sort_keys=True, allow_nan=False) + "\n")
    log = [(c.folder or Path(c.arg).name, c.first / c.info.fs, c.rows) for c in caps]
    tmp[LOG_FILE].write_text(log_csv(log, {k: v for c in caps for k, v in c.scales.items()}))
    page_caps = []
    for c, cs in zip(caps, summary["captures"]):
        png = pictures.png(c.index)
        st = []
        for (f, _), row in zip(c.stations, cs["stations"]):
            r = c.rows[station_name(f)]
            t = c.first / c.info.fs + r.index
            st.append(dict(row, name=station_name(f), folder=c.folder,
                           svg=level_svg(t, r.mean_db, r.lo_db, r.hi_db, label=f"carrier level of {station_name(f)}")))
        page_caps.append({
            "name": c.folder or Path(c.arg).name,
            "subtitle": (f"{c.arg}: {c.info.kind}, rate {format_frequency(c.info.fs)}, excerpt {c.first / c.info.fs:g} s "
                         f"+ {c.count / c.info.fs:g} s, {len(c.stations)} stations, {len(c.segments)} segments"),
            "spectrogram_png": png, "stations": st,
        })
    title = "sdrx band: " + ", ".join(c.folder or Path(c.arg).name for c in caps)
    tmp[PAGE_FILE].write_text(render_band_page({"title": title, "captures": page_caps}))
