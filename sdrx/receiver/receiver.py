"""A chain bound to a capture: design + sample rate + tuning, with state.

Feeding a :class:`Receiver` the capture in blocks of any size gives the same
audio as feeding it all at once: every stage works on whole internal
segments (the channelizer's hop), whatever the caller's block size.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import ParameterError
from ..units import db20, format_frequency
from ..dsp.channelizer import plan_channelizer
from ..dsp.detectors import diagonal_clipping_limit_s
from .backend import Backend
from .fast import FastFrontEnd, image_coverage

__all__ = ["Receiver", "PATHS", "channel_rate"]

PATHS = ("fast", "exact")

#: largest numerator × denominator of the channel-to-audio rate ratio (the resampler's FIR has 2·that + 1 taps)
MAX_RESAMPLE_TERMS = 20000


def channel_rate(audio_rate_hz: float, fs: float) -> float:
    """The rate the detector and AGC run at: a multiple of the audio rate of at least 88 kHz.

    Examples
    --------
    >>> channel_rate(48000.0, 2.4e6), channel_rate(44100.0, 2.4e6)
    (96000.0, 88200.0)
    """
    r = math.ceil(88000.0 / audio_rate_hz)
    return float(min(audio_rate_hz * r, fs))


def _check_channel_holds_audio(plan, design, info) -> None:
    """The channel (flat to plan.f_pass_hz) must pass the audio band, else its top is cut silently; and the
    IF must be high enough that its mirror (2·IF away) stays outside the channel."""
    if 2 * design.if_hz < plan.fs_ch:
        raise ParameterError(
            f"if_frequency {format_frequency(design.if_hz)}: too low for the channel rate {format_frequency(plan.fs_ch)} "
            f"(audio.rate {format_frequency(design.audio.rate_hz)}): the IF's mirror, 2·IF away, would fall inside the "
            f"channel; use an IF of at least {format_frequency(plan.fs_ch / 2)} or a lower audio.rate")
    from fractions import Fraction

    r = (Fraction(design.audio.rate_hz).limit_denominator(10000)
         / Fraction(plan.fs_ch).limit_denominator(10000)).limit_denominator(1000)
    if r.numerator * r.denominator > MAX_RESAMPLE_TERMS:
        raise ParameterError(
            f"{getattr(info, 'path', 'capture')}: rate {format_frequency(info.fs)} gives a channel rate "
            f"{format_frequency(plan.fs_ch)} whose ratio to audio.rate {format_frequency(design.audio.rate_hz)} is "
            f"{r.numerator}/{r.denominator}; the resampler takes ratios up to {MAX_RESAMPLE_TERMS} in "
            f"numerator × denominator (a capture rate of at least {format_frequency(channel_rate(design.audio.rate_hz, 1e12))} "
            "always works)")
    top = design.audio.lowpass_hz
    if plan.f_pass_hz < top:
        need = top / (plan.f_pass_hz / plan.fs_ch)
        raise ParameterError(
            f"{getattr(info, 'path', 'capture')}: rate {format_frequency(info.fs)} is too low for this chain: its "
            f"channel is flat only to {format_frequency(plan.f_pass_hz)}, below audio.lowpass {format_frequency(top)}; "
            f"a capture rate of at least {format_frequency(need)} is needed")


class Receiver:
    """Stateful receiver: capture samples in, audio out.

    Parameters
    ----------
    design : ChainDesign
    info : CaptureInfo or similar
        Needs ``fs``, ``kind`` ("iq"|"real"), ``center_hz`` and ``band_hz``.
    tune_hz : float
        The station's carrier frequency.
    path : {"fast", "exact"}
    agc_hold_gain_db : float, optional
        Hold the AGC stage gain at this value.
    first_sample : int
        Absolute index of the first sample fed (phase continuity of the LO
        and channel oscillators across excerpts).
    if_rate_hz : float, optional
        Exact path only: the IF sample rate (default: chosen to hold every
        mixing product of the captured band).

    Raises
    ------
    ParameterError
        Tuning outside the capture, unknown path, unusable IF rate.
    """

    def __init__(self, design, info, tune_hz: float, path: str = "fast", agc_hold_gain_db=None,
                 first_sample: int = 0, if_rate_hz=None):
        if path not in PATHS:
            raise ParameterError(f"--path {path!r}: choose one of {', '.join(PATHS)}")
        self.design = design
        self.info = info
        self.tune_hz = float(tune_hz)
        self.path = path
        self.warnings: list = []
        lo, hi = info.band_hz
        name = getattr(info, "path", "capture")
        if not lo < tune_hz < hi:
            raise ParameterError(
                f"--tune {format_frequency(tune_hz)}: outside the capture's band "
                f"{format_frequency(lo)} to {format_frequency(hi)} ({name})"
            )
        if design.lo_hz(tune_hz) <= 0:
            raise ParameterError(
                f"--tune {format_frequency(tune_hz)}: with low-side injection and IF {format_frequency(design.if_hz)} "
                f"the LO would be at {format_frequency(design.lo_hz(tune_hz))}; tune above {format_frequency(design.if_hz)}"
            )
        fs_ch = channel_rate(design.audio.rate_hz, info.fs)
        self.plan = plan_channelizer(info.fs, fs_ch)
        self.fs_ch = self.plan.fs_ch
        _check_channel_holds_audio(self.plan, design, info)
        edge = design.audio.lowpass_hz
        if tune_hz - edge < lo or tune_hz + edge > hi:
            self.warnings.append(
                f"the wanted channel reaches past the capture's band edge ({format_frequency(lo)} to {format_frequency(hi)})"
            )
        cover = image_coverage(design.image_hz(tune_hz), (lo, hi), self.plan)
        if cover == "outside":
            self.warnings.append(
                f"image channel {format_frequency(design.image_hz(tune_hz))} is outside the capture: "
                "its signals are absent, so image rejection is not exercised"
            )
        elif cover == "partly":
            self.warnings.append(
                f"image channel {format_frequency(design.image_hz(tune_hz))} lies partly outside the capture"
            )
        if path == "fast":
            self.front = FastFrontEnd(design, self.plan, info.kind, info.center_hz, (lo, hi), tune_hz, first_sample)
        else:
            from .exact import ExactFrontEnd

            self.front = ExactFrontEnd(design, self.plan, info, tune_hz, first_sample, if_rate_hz)
            self.warnings.extend(self.front.warnings)
        # the excerpt's first sample on the channel-rate grid of the whole capture (nearest sample
        # when the excerpt starts between two)
        first_ch = int(round(first_sample * self.fs_ch / info.fs))
        self.backend = Backend(design, self.fs_ch, agc_hold_gain_db, first_ch)
        self.audio_fs = float(design.audio.rate_hz)
        self._ref = float(abs(design.rf_response(tune_hz, tune_hz)[0]))
        self._n_in = 0
        self._n_out = 0
        self._drop = self.backend.resampler.delay_out
        self._flushed = False
        self._n_u = 0          # channel-rate samples passed to the backend
        self._pool = None      # worker thread for the fast path's front end
        self._pending = None   # its output for the previous block

    @property
    def delay_s(self) -> float:
        """Group delay of the analog chain (IF stages at the carrier, audio filters at 1 kHz), s."""
        f = self.tune_hz + np.array([-50.0, 50.0])
        ph = np.unwrap(np.angle(self.design.rf_response(f, self.tune_hz)))
        tau_if = abs(ph[1] - ph[0]) / (2 * math.pi * 100.0)
        from scipy import signal

        sos = self.backend.sos_audio
        _, h1 = signal.sosfreqz(sos, worN=[990.0, 1010.0], fs=self.fs_ch)
        ph_a = np.unwrap(np.angle(h1))
        tau_audio = -(ph_a[1] - ph_a[0]) / (2 * math.pi * 20.0)
        return float(tau_if + tau_audio)

    def _back(self, u: np.ndarray, meter_n=None) -> np.ndarray:
        self._n_u += len(u)
        return self.backend.process(u, meter_n=meter_n)

    def _out(self, a: np.ndarray) -> np.ndarray:
        if self._drop:
            k = min(self._drop, len(a))
            a = a[k:]
            self._drop -= k
        self._n_out += len(a)
        return a

    def process(self, block: np.ndarray) -> np.ndarray:
        """Feed capture samples; return the audio completed so far.

        In the fast path the front end (channelizer) works on this block in a
        worker thread while the backend (AGC, detector, audio) works on the
        previous one, so the audio returned lags by one block; :meth:`flush`
        returns the rest. The result does not depend on the threading.
        """
        if self._flushed:
            raise RuntimeError("Receiver already flushed")
        self._n_in += len(block)
        if self.path != "fast":
            return self._out(self._back(self.front.process(block)))
        if self._pool is None:
            from concurrent.futures import ThreadPoolExecutor

            self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="sdrx-front")
        fut = self._pool.submit(self.front.process, block)
        out = self._back(self._pending) if self._pending is not None else np.zeros(0)
        self._pending = fut.result()
        return self._out(out)

    def flush(self) -> np.ndarray:
        """End of input: return the remaining audio, so that the total is duration × audio rate."""
        self._flushed = True
        head = np.zeros(0)
        if self._pending is not None:
            head = self._out(self._back(self._pending))
            self._pending = None
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None
        target = int(math.floor(self._n_in * self.audio_fs / self.info.fs + 1e-9))
        # the front end's tail runs past the input (zero padding, so the filters ring down as
        # after a real end of signal); the level statistics count only the input's duration
        n_ch = int(math.ceil(self._n_in * self.fs_ch / self.info.fs - 1e-9))
        tail_u = self.front.flush()
        parts = [head, self._out(self._back(tail_u, meter_n=max(0, n_ch - self._n_u))),
                 self._out(self.backend.flush())]
        tail = np.concatenate(parts)
        have_before = self._n_out - len(tail)
        need = max(0, target - have_before)
        if len(tail) < need:
            tail = np.concatenate([tail, np.zeros(need - len(tail))])
        tail = tail[:need]
        self._n_out = have_before + len(tail)
        self._finish_warnings()
        return tail

    def close(self) -> None:
        """Stop the worker threads (also after an error part-way through); idempotent."""
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None
        close = getattr(self.front, "close", None)
        if close is not None:
            close()

    def _finish_warnings(self) -> None:
        det = self.design.detector
        depths = self.backend.meter.depths
        if len(depths) > 1:
            depths = depths[1:]   # the first window holds the filters' start-up
        if det.kind == "diode" and depths:
            m = float(np.percentile(depths, 90)) if len(depths) > 1 else float(depths[0])
            fm = self.design.audio.lowpass_hz
            limit = diagonal_clipping_limit_s(min(m, 0.999), fm)
            if det.rc_us * 1e-6 > limit:
                self.warnings.append(
                    f"diode RC {det.rc_us:g} us is slower than the diagonal-clipping limit "
                    f"{limit * 1e6:.1f} us for depth {m:.2f} at {fm:g} Hz: expect clipping on deep modulation"
                )

    def carrier_levels_dbfs(self, settle_s: float = 0.05) -> np.ndarray:
        """Carrier level referred to the antenna, per 10 ms window after ``settle_s``.

        The IF output's mean envelope divided by the chain's response at the
        tuned frequency: an on-tune carrier of A dBFS reads A.
        """
        means = np.asarray(self.backend.meter.means, dtype=float)
        skip = int(round(settle_s / 0.01))
        if len(means) > skip:
            means = means[skip:]
        return db20(np.maximum(means, 1e-15) / self._ref)

    def stats(self, settle_s: float = 0.05) -> dict:
        """Carrier level (antenna-referred, dBFS) and AGC gain range."""
        lv = self.carrier_levels_dbfs(settle_s)
        agc = self.backend.agc
        if len(lv):
            c = {"mean": float(db20(np.mean(10 ** (lv / 20)))), "min": float(lv.min()), "max": float(lv.max())}
        else:
            c = {"mean": None, "min": None, "max": None}
        g = {"min": agc.gain_min_db if math.isfinite(agc.gain_min_db) else None,
             "max": agc.gain_max_db if math.isfinite(agc.gain_max_db) else None}
        return {"carrier_dbfs": c, "agc_gain_db": g}
