"""The part of the chain both paths share: AGC, detector, audio filters, resampling, statistics.

Input is the IF output as a complex envelope u at the channel rate (stage
gains not yet applied); output is audio at the spec's audio rate.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import signal

from ..dsp.agc import Agc
from ..dsp.detectors import make_detector
from ..dsp.notch import make_notch
from ..dsp.resample import RationalResampler

__all__ = ["Backend", "LevelMeter", "feed_meters", "AGC_STEP"]

#: samples of the channel rate per AGC control interval
AGC_STEP = 64


class LevelMeter:
    """Mean envelope over fixed windows, and the modulation depth seen per window.

    Parameters
    ----------
    fs : float
        Rate, Hz.
    window_s : float
        Window length for carrier levels.
    """

    def __init__(self, fs: float, window_s: float = 0.01, depth_window_s: float = 0.05):
        self.n = max(1, int(round(window_s * fs)))
        self.nd = max(1, int(round(depth_window_s * fs)))
        self._sum = 0.0
        self._cnt = 0
        self.means: list = []
        self._dmax = 0.0
        self._dmin = math.inf
        self._dcnt = 0
        self.depths: list = []

    def feed(self, env: np.ndarray, env_gained: np.ndarray) -> None:
        """The ungained envelope ``env`` (carrier levels) and the gained one (modulation depth)."""
        feed_meters([self], env[None, :], env_gained[None, :])


def feed_meters(meters, env: np.ndarray, env_gained: np.ndarray) -> None:
    """``LevelMeter.feed`` of row i on ``meters[i]``, for meters at the same point of their windows.

    Each window's sum is the row's own ``np.sum`` over the window (the same pairwise sum for one row as
    for many), added to the sum carried from the previous block.
    """
    first = meters[0]
    n = env.shape[1]
    sums = np.array([m._sum for m in meters])
    cnt = first._cnt
    pos = 0
    while pos < n:
        take = min(first.n - cnt, n - pos)
        sums = sums + np.sum(env[:, pos:pos + take], axis=1)
        cnt += take
        pos += take
        if cnt == first.n:
            for m, s in zip(meters, sums / first.n):
                m.means.append(float(s))
            sums, cnt = np.zeros(len(meters)), 0
    dmax = np.array([m._dmax for m in meters])
    dmin = np.array([m._dmin for m in meters])
    dcnt = first._dcnt
    pos = 0
    while pos < n:
        take = min(first.nd - dcnt, n - pos)
        seg = env_gained[:, pos:pos + take]
        dmax = np.maximum(dmax, seg.max(axis=1))
        dmin = np.minimum(dmin, seg.min(axis=1))
        dcnt += take
        pos += take
        if dcnt == first.nd:
            s = dmax + dmin
            for m, hi, lo, tot in zip(meters, dmax, dmin, s):
                m.depths.append(float((hi - lo) / tot) if tot > 0 else 0.0)
            dmax, dmin, dcnt = np.zeros(len(meters)), np.full(len(meters), math.inf), 0
    for k, m in enumerate(meters):
        m._sum, m._cnt = float(sums[k]), cnt
        m._dmax, m._dmin, m._dcnt = float(dmax[k]), float(dmin[k]), dcnt


class Backend:
    """AGC -> detector -> audio high-pass/low-pass -> gain -> resampler.

    Parameters
    ----------
    design : ChainDesign
    fs_ch : float
        Channel rate, Hz.
    agc_hold_gain_db : float, optional
        Hold the AGC stage gain (single-signal measurements).
    first_sample_ch : int
        Channel-rate index of the first sample in the whole capture (an
        excerpt's AGC control intervals stay on the whole run's grid).
    freeze_ch : int
        Samples at the start (of the receiver's pre-roll) during which the
        AGC holds its start gain before it settles on the carrier.
    skip_ch : int
        Samples at the start (the pre-roll) left out of the level statistics.
    """

    def __init__(self, design, fs_ch: float, agc_hold_gain_db=None, first_sample_ch: int = 0,
                 freeze_ch: int = 0, skip_ch: int = 0):
        self.design = design
        self.fs_ch = fs_ch
        self.agc = Agc(design.agc, fs_ch, design.fixed_gain_db, design.agc_stage_gain_db, agc_hold_gain_db,
                       step=AGC_STEP, grid_offset=first_sample_ch, freeze=freeze_ch, stats_from=skip_ch)
        self.detector = make_detector(design.detector, fs_ch, inverted=design.injection == "high", audio=design.audio)
        self.notch = make_notch(design.notch, fs_ch, design.audio)   # None when off
        au = design.audio
        sos_hp = signal.butter(au.highpass_order, au.highpass_hz, btype="highpass", fs=fs_ch, output="sos")
        sos_lp = signal.butter(au.lowpass_order, au.lowpass_hz, btype="lowpass", fs=fs_ch, output="sos")
        self.sos_audio = np.vstack([sos_hp, sos_lp])
        self.zi_audio = np.zeros((self.sos_audio.shape[0], 2))
        self.audio_gain = 10.0 ** (au.gain_db / 20.0)
        self.resampler = RationalResampler(fs_ch, au.rate_hz)
        self.meter = LevelMeter(fs_ch)
        self._skip = int(skip_ch)   # samples still to leave out of the meter
        self._n_seen = 0            # samples processed

    def process(self, u: np.ndarray, meter_n=None) -> np.ndarray:
        """IF output (complex envelope, ungained) -> audio samples.

        ``meter_n`` limits the level statistics to the first samples (the
        rest is the ring-down after the end of the input).
        """
        if len(u) == 0:
            return np.zeros(0)
        mag = np.abs(u)
        k = len(u) if meter_n is None else min(len(u), meter_n)
        if k < len(u):
            self.agc.end_stats(self._n_seen + k)
        self._n_seen += len(u)
        ug, _ = self.agc.process(u, mag=mag, want_db=False)
        env = np.abs(ug)   # the gained envelope: for the depth meter and the detector
        j = min(self._skip, k)
        self._skip -= min(self._skip, len(u))
        if k > j:
            self.meter.feed(mag[j:k], env[j:k])
        d = self.detector.process(ug, mag=env)
        if self.notch is not None:
            d = self.notch.process(d)   # detector -> notch -> audio filters; it may hold samples back
            if not len(d):
                return np.zeros(0)
        a, self.zi_audio = signal.sosfilt(self.sos_audio, d, zi=self.zi_audio)
        return self.resampler.process(a * self.audio_gain)

    def flush(self) -> np.ndarray:
        """Audio still inside the resampler's delay line (and held by the notch's look-ahead)."""
        head = np.zeros(0)
        held = self.notch.flush() if self.notch is not None else head
        if len(held):
            a, self.zi_audio = signal.sosfilt(self.sos_audio, held, zi=self.zi_audio)
            head = self.resampler.process(a * self.audio_gain)
        return np.concatenate([head, self.resampler.process(np.zeros(self.resampler.delay_in + 1))])
