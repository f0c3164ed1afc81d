"""The band's spectrogram pictures drawn in a helper process: the same bytes as here, whatever happens to it.

These are consistency checks: the helper runs the same drawing function as this process
(:func:`sdrx.band.figures.spectrogram_png`), so its PNG must be byte-identical; the picture itself
is checked in tests/test_band_spectrogram.py and in the browser.
"""

import os
import signal

import numpy as np
import pytest

import sdrx.band.pictures as pictures
from helpers_band import TUNES
from sdrx.band import band
from sdrx.band.figures import spectrogram_png
from sdrx.band.pictures import BandPictures, PictureDrawer


def _args(seed: int, rows: int = 40) -> dict:
    rng = np.random.default_rng(seed)
    return {"freqs_hz": np.linspace(0.9e6, 1.1e6, 64), "times_s": np.arange(rows) * 0.05,
            "db": rng.normal(-70.0, 8.0, (rows, 64)).astype(np.float32), "stations": [(1.0e6, "1000k")],
            "title": f"picture {seed}", "column_s": 0.05}


def test_helper_draws_the_same_bytes_as_here():
    with PictureDrawer() as d:
        assert d._proc is not None
        d.submit("b", **_args(2))
        d.submit("a", **_args(1))
        a, b = d.png("a"), d.png("b")          # asked in another order than drawn
        proc = d._proc
    assert a == spectrogram_png(**_args(1)) and b == spectrogram_png(**_args(2)) and a != b
    assert proc.poll() is not None              # closed: the helper is gone


def test_a_helper_that_dies_leaves_the_drawing_here():
    with PictureDrawer() as d:
        d.submit(0, **_args(3))
        os.kill(d._proc.pid, signal.SIGKILL)
        d._proc.wait()
        assert d.png(0) == spectrogram_png(**_args(3))
        assert d._proc is None


def test_a_drawing_that_fails_raises_its_own_error_here():
    with PictureDrawer() as d:
        d.submit("bad", **dict(_args(4), stations=None))     # not a sequence: TypeError in the helper
        with pytest.raises(TypeError):
            d.png("bad")
        with pytest.raises(KeyError, match="no picture was submitted under 'never'"):
            d.png("never")


def test_an_error_in_the_run_stops_the_helper():
    with pytest.raises(RuntimeError, match="stop"):
        with PictureDrawer() as d:
            proc = d._proc
            raise RuntimeError("stop")
    assert proc.wait(5.0) is not None


def test_segments_gather_in_order_and_once():
    drawn = {}

    class Recorder(PictureDrawer):
        def submit(self, key, **kwargs):
            drawn[key] = kwargs

    p = BandPictures(Recorder(helper=False), {7: (3, {"title": "t"})})
    rows = [np.full((2, 4), float(k), np.float32) for k in range(3)]
    p.add(7, 2, rows[2])
    p.add(7, 0, rows[0])
    p.add(7, 0, rows[1])          # a repeat (a segment reported twice) is ignored
    assert drawn == {}
    p.add(7, 1, rows[1])
    assert drawn[7]["title"] == "t"
    np.testing.assert_array_equal(drawn[7]["db"], np.concatenate(rows))


def test_band_outputs_do_not_depend_on_the_helper(band_capture, tmp_path, monkeypatch, capfd):
    stations = ",".join(f"{f / 1e3:g}k" for f in TUNES[:2])
    monkeypatch.setattr(pictures, "HELPER_MIN_SAMPLES", 10 ** 12)
    band([band_capture], tmp_path / "here", stations=stations, segment_s=4, duration_s=5)
    here_err = capfd.readouterr().err
    started = []
    real = PictureDrawer._start

    def start(self):
        real(self)
        started.append(self._proc)

    monkeypatch.setattr(pictures, "HELPER_MIN_SAMPLES", 0)
    monkeypatch.setattr(PictureDrawer, "_start", start)
    band([band_capture], tmp_path / "helper", stations=stations, segment_s=4, duration_s=5)
    assert len(started) == 1 and started[0] is not None and started[0].poll() is not None
    assert capfd.readouterr().err == here_err              # the helper prints nothing of its own
    files = sorted(p.name for p in (tmp_path / "here").iterdir())
    assert files == sorted(p.name for p in (tmp_path / "helper").iterdir())
    for name in files:
        assert (tmp_path / "here" / name).read_bytes() == (tmp_path / "helper" / name).read_bytes(), name


def test_a_segment_hands_over_its_spectrogram_once_from_the_read_ahead(band_capture):
    import threading

    from sdrx.band.plan import cut_period, grid_period, plan_segments
    from sdrx.band.segment import SegmentJob, StationJob, run_segment
    from sdrx.band.spectrogram import plan_spectrogram
    from sdrx.capture import open_capture
    from sdrx.chain import design_chain
    from sdrx.receiver import Receiver

    info = open_capture(band_capture).info
    d = design_chain("medium")
    rx = Receiver(d, info, TUNES[0])
    n = int(6 * info.fs)
    segs = plan_segments(0, n, info.fs, 3.0, 0.5, grid_period([rx]), cut_period([rx]))
    sp = plan_spectrogram(info, 0, n, 10e3, segs[0].samples)

    class Sink:
        def write(self, i, codes):
            pass

    for s in segs:
        told = []
        job = SegmentJob(0, str(band_capture), {}, (StationJob(TUNES[0], d),), s, 0, n, False, sp)
        r = run_segment(job, sink=Sink(),
                        on_spectrogram=lambda db: told.append((threading.current_thread().name, db)))
        assert len(told) == 1 and told[0][0] == "sdrx-read"
        assert told[0][1] is r.spectrogram and len(r.spectrogram) > 0


def test_an_interrupted_band_run_leaves_no_helper_and_no_folder(band_capture, tmp_path, monkeypatch):
    import sdrx.band.segment as segment

    started = []
    real_start, real_encode = PictureDrawer._start, segment.encode_audio
    calls = []

    def start(self):
        real_start(self)
        started.append(self._proc)

    def encode(a, float_output):
        calls.append(1)
        if len(calls) == 1:
            raise KeyboardInterrupt        # Ctrl-C part-way through the receiving
        return real_encode(a, float_output)

    monkeypatch.setattr(pictures, "HELPER_MIN_SAMPLES", 0)
    monkeypatch.setattr(PictureDrawer, "_start", start)
    monkeypatch.setattr(segment, "encode_audio", encode)
    with pytest.raises(KeyboardInterrupt):
        band([band_capture], tmp_path / "out", stations="1010k", duration_s=3)
    assert len(started) == 1 and started[0].poll() is not None
    assert not (tmp_path / "out").exists()
