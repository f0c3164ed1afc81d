"""Programme-scored receiver runs: a scenario synthesized by sdrx, one station received, its audio scored.

The capture comes from sdrx's own synthesizer (``parse_scenario`` +
``synthesize``), so its truth sidecar gives the station's programme; the
audio is scored with ``helpers_score.programme_snr_db`` against it.

The AGC is held at the gain that puts the tuned carrier at the AGC reference:
the present AGC rides speech modulation and by itself limits speech to about
30 dB programme SNR, which would hide what the stage under test does.
"""

from __future__ import annotations

import math

import numpy as np

from sdrx.capture import open_capture
from sdrx.chain import design_chain
from sdrx.receiver import Receiver
from sdrx.synth import parse_scenario, synthesize

from helpers_rx import feed_blocks
from helpers_score import programme_from_truth, programme_snr_db

__all__ = ["make_capture", "held_gain_db", "receive_audio", "receive_scored", "speech", "carrier"]

AUDIO_FS = 48000.0


def speech(name, frequency, level_dbfs, depth=0.8, **kw):
    """A speech-modulated station table for a scenario."""
    return {"name": name, "frequency": frequency, "level_dbfs": level_dbfs, "depth": depth,
            "program": {"kind": "speech"}, **kw}


def carrier(name, frequency, level_dbfs, **kw):
    """An unmodulated carrier (depth 0): what beats with the wanted one into a whistle."""
    return {"name": name, "frequency": frequency, "level_dbfs": level_dbfs, "depth": 0.0,
            "program": {"kind": "tone", "frequency": 1000.0}, **kw}


def make_capture(tmp_path, stations, *, rate=240e3, center=1.0e6, seconds=3.0, impulse=None, seed=5,
                 name="capture"):
    """Synthesize an I/Q capture (cf32 SigMF) in tmp_path; return (samples, info, truth)."""
    sc = {"capture": {"kind": "iq", "rate": rate, "center": center, "seconds": seconds, "datatype": "cf32_le",
                      "noise_dbfs_per_hz": -130, "seed": seed},
          "station": list(stations)}
    if impulse is not None:
        sc["impulse_noise"] = impulse
    out = tmp_path / f"{name}.sigmf-meta"
    truth = synthesize(parse_scenario(sc), out)
    reader = open_capture(out)
    x = np.concatenate(list(reader.blocks(1 << 20)))
    return x, reader.info, truth


def held_gain_db(design, tune_hz, level_dbfs):
    """AGC stage gain that puts a carrier of level_dbfs at the AGC reference (the loop's own aim)."""
    ref = abs(design.rf_response(tune_hz, tune_hz)[0])
    return design.agc.reference_dbfs - level_dbfs - 20 * math.log10(ref) - design.fixed_gain_db


def receive_scored(chain, capture, tune_hz, station="Wanted", *, path="fast", block=None, level_dbfs=None):
    """Receive ``station`` with the AGC held; return (programme SNR dB, audio, receiver)."""
    audio, rx = receive_audio(chain, capture, tune_hz, station, path=path, block=block, level_dbfs=level_dbfs)
    x, info, truth = capture
    p = programme_from_truth(truth, station, AUDIO_FS, 0.0, len(x) / info.fs)
    return programme_snr_db(audio, p, AUDIO_FS), audio, rx


def receive_audio(chain, capture, tune_hz, station="Wanted", *, path="fast", block=None, level_dbfs=None):
    """Receive ``station`` with the AGC held (no scoring); return (audio, receiver)."""
    x, info, truth = capture
    design = design_chain(chain)
    if level_dbfs is None:
        level_dbfs = next(s for s in truth["stations"] if s["name"] == station)["level_dbfs"]
    level = level_dbfs
    rx = Receiver(design, info, tune_hz, path=path, agc_hold_gain_db=held_gain_db(design, tune_hz, level))
    try:
        audio = feed_blocks(rx, x, block)
    finally:
        rx.close()
    return audio, rx
