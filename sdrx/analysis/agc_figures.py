"""The AGC measured through the running chain: characteristic, range, attack, release, ripple.

Methods after the measurements of AGC on AM broadcast receivers (IEC 60315-3,
*Methods of measurement on radio receivers for various classes of emission,
Part 3: receivers for amplitude-modulated sound-broadcasting emissions*;
from memory):

- **characteristic**: the audio output (the 1 kHz tone of a carrier
  modulated 30 %, the standard test modulation; its level by a sine fit,
  IEEE Std 1241) against the antenna level, −110 to 0 dBFS in 5 dB steps,
  relative to the output at the reference input ``REFERENCE_DBFS``;
- **range**: the span of antenna levels around the reference over which the
  output stays within 3 dB and within 10 dB of its level there (the
  crossings interpolated linearly in dB between the steps; the top of the
  span is bounded by full scale);
- **attack / release**: after a +20 dB / −20 dB step of an unmodulated
  carrier, the time until the carrier level at the detector stays within
  2 dB of its final value;
- **ripple**: the peak-to-peak gain of the AGC on a steady carrier modulated
  80 % at 100 Hz, after settling (what a carrier filter leaves of the
  modulation).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["measure_agc", "AGC_METHOD", "REFERENCE_DBFS", "LEVELS_DBFS"]

#: antenna level of the reference input, dBFS (a strong station)
REFERENCE_DBFS = -20.0
#: the characteristic's antenna levels, dBFS
LEVELS_DBFS = tuple(float(v) for v in range(-110, 1, 5))
AGC_METHOD = ("IEC 60315-3 style (from memory): audio output of a carrier modulated 30 % at 1 kHz against "
              "its antenna level, relative to the output at -20 dBFS; range within 3 and 10 dB of that output; "
              "attack/release: time to within 2 dB of the final carrier level at the detector after a "
              "+20/-20 dB step; ripple: peak-to-peak AGC gain on a carrier modulated 80 % at 100 Hz")
_FS = 240e3
_AFS_SKIP_S = 0.15          # audio left out before the tone is read (the AGC's own settling after the start)


@dataclass(frozen=True)
class _Capture:
    """A test capture made in code, centred on the tune."""

    fs: float
    center_hz: float
    kind: str = "iq"
    path: str = "test signal"

    @property
    def band_hz(self):
        return (self.center_hz - self.fs / 2, self.center_hz + self.fs / 2)


def _receiver(design, tune_hz, path):
    from ..receiver import Receiver

    return Receiver(design, _Capture(_FS, tune_hz), tune_hz, path=path)


def _run(design, tune_hz, path, x, trace=False):
    rx = _receiver(design, tune_hz, path)
    gains = []
    if trace:
        rx.backend.agc.trace = gains
    audio = np.concatenate([rx.process(x.astype(np.complex64)), rx.flush()])
    g = np.concatenate(gains)[rx._pre_ch:] if trace else None
    return audio, rx, g


def _tone_db(audio, afs, f_hz=1000.0):
    """Level of the tone in dB (three-parameter sine fit, IEEE Std 1241)."""
    t = np.arange(len(audio)) / afs
    a = np.column_stack([np.cos(2 * np.pi * f_hz * t), np.sin(2 * np.pi * f_hz * t), np.ones(len(t))])
    c, *_ = np.linalg.lstsq(a, audio, rcond=None)
    return 20.0 * math.log10(max(math.hypot(c[0], c[1]), 1e-15))


def characteristic(design, tune_hz, path="fast", seconds=0.3, progress=None):
    """[(antenna dBFS, audio dB re the reference input)] over :data:`LEVELS_DBFS`."""
    n = int(seconds * _FS)
    t = np.arange(n) / _FS
    mod = 1.0 + 0.3 * np.cos(2 * np.pi * 1000.0 * t)
    out = {}
    levels = sorted(set(LEVELS_DBFS) | {REFERENCE_DBFS})
    for i, level in enumerate(levels):
        audio, rx, _ = _run(design, tune_hz, path, 10 ** (level / 20) * mod + 0j)
        k = int(_AFS_SKIP_S * rx.audio_fs)
        out[level] = _tone_db(audio[k:], rx.audio_fs)
        if progress is not None:
            progress(i + 1, len(levels))
    ref = out[REFERENCE_DBFS]
    return [(lv, out[lv] - ref) for lv in LEVELS_DBFS]


def agc_range_db(curve, within_db: float):
    """(span dB, (low, high) dBFS) of the antenna levels around the reference within ±within_db."""
    lv = np.array([p[0] for p in curve])
    db = np.array([p[1] for p in curve])
    i0 = int(np.argmin(np.abs(lv - REFERENCE_DBFS)))

    def edge(step):
        i = i0
        while 0 <= i + step < len(lv) and abs(db[i + step]) <= within_db:
            i += step
        j = i + step
        if not 0 <= j < len(lv):
            return float(lv[i])
        # linear in dB between the last level inside and the first outside
        a, b = abs(db[i]), abs(db[j])
        frac = (within_db - a) / (b - a) if b != a else 0.0
        return float(lv[i] + frac * (lv[j] - lv[i]))

    lo, hi = edge(-1), edge(+1)
    return hi - lo, (lo, hi)


def step_time_s(design, tune_hz, path, before_dbfs, after_dbfs, within_db=2.0, t_step=0.1, seconds=0.6):
    """Time after a level step until the carrier at the detector stays within ``within_db`` of its final value."""
    n = int(seconds * _FS)
    t = np.arange(n) / _FS
    level = np.where(t < t_step, before_dbfs, after_dbfs)
    _, rx, g = _run(design, tune_hz, path, 10 ** (level / 20) + 0j, trace=True)
    fs_ch = rx.fs_ch
    k = int(round(t_step * fs_ch))
    end = int((seconds - 0.01) * fs_ch)
    at_detector = g[:end] + np.where(np.arange(end) < k, before_dbfs, after_dbfs)
    final = float(np.mean(at_detector[end - int(0.02 * fs_ch):end]))
    off = np.nonzero(np.abs(at_detector[k:] - final) > within_db)[0]
    return float(off[-1] + 1) / fs_ch if len(off) else 0.0


def ripple_db(design, tune_hz, path="fast", seconds=0.5):
    """Peak-to-peak AGC gain on a carrier modulated 80 % at 100 Hz, after 0.2 s."""
    n = int(seconds * _FS)
    t = np.arange(n) / _FS
    x = 10 ** (REFERENCE_DBFS / 20) * (1.0 + 0.8 * np.cos(2 * np.pi * 100.0 * t)) + 0j
    _, rx, g = _run(design, tune_hz, path, x, trace=True)
    g = g[int(0.2 * rx.fs_ch):int((seconds - 0.01) * rx.fs_ch)]
    return float(np.ptp(g))


def measure_agc(design, tune_hz: float, path: str = "fast", progress=None) -> dict:
    """``measured.agc`` of the report.

    Returns
    -------
    dict
        ``method``, ``reference_dbfs``, ``characteristic`` ([dBFS, dB] pairs),
        ``range_db`` {"3", "10"}, ``range_dbfs`` {"3": [low, high], "10": ...},
        ``attack_ms``, ``release_ms``, ``ripple_db``; with the AGC off, the
        characteristic and range only (no loop to time).
    """
    curve = characteristic(design, tune_hz, path, progress=progress)
    out = {"method": AGC_METHOD, "path": path, "reference_dbfs": REFERENCE_DBFS,
           "characteristic": [[float(lv), round(float(db), 3)] for lv, db in curve], "range_db": {},
           "range_dbfs": {}}
    for k in (3.0, 10.0):
        span, (lo, hi) = agc_range_db(curve, k)
        out["range_db"][f"{k:g}"] = round(float(span), 1)
        out["range_dbfs"][f"{k:g}"] = [round(float(lo), 1), round(float(hi), 1)]
    if design.agc.enabled:
        out["attack_ms"] = round(1e3 * float(step_time_s(design, tune_hz, path, -40.0, -20.0)), 1)
        out["release_ms"] = round(1e3 * float(step_time_s(design, tune_hz, path, -20.0, -40.0)), 1)
        out["ripple_db"] = round(float(ripple_db(design, tune_hz, path)), 3)
    else:
        out["attack_ms"] = out["release_ms"] = out["ripple_db"] = None
    return out
