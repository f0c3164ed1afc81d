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
from ..dsp.agc import settle_window_s
from ..dsp.blanker import NoiseBlanker
from ..dsp.channelizer import Channelizer, plan_channelizer
from ..dsp.detectors import diagonal_clipping_limit_s
from . import preroll
from .backend import AGC_STEP, Backend
from .fast import FastFrontEnd, image_coverage
from .monitor import ChannelMonitor

__all__ = ["Receiver", "PATHS", "channel_rate", "station_full_scale"]

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


def station_full_scale(design, full_scale_dbm=None):
    """The full scale a station runs with, dBm: ``--full-scale-dbm`` when given, else the spec's (or None)."""
    return design.frontend.full_scale_dbm if full_scale_dbm is None else float(full_scale_dbm)


def _check_full_scale(frontend, full_scale_dbm) -> None:
    nf = frontend.noise_figure_db
    if nf is not None and full_scale_dbm is None:
        raise ParameterError(
            f"frontend.noise_figure_db: {nf:g} dB needs the antenna power of full scale to place the "
            "thermal noise; set frontend.full_scale_dbm in the chain spec or give --full-scale-dbm")


def _checked_plan(design, info, tune_hz: float):
    """The channel plan of a station, after the checks that refuse it (tuning, LO, channel rate)."""
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
    plan = plan_channelizer(info.fs, channel_rate(design.audio.rate_hz, info.fs))
    _check_channel_holds_audio(plan, design, info)
    return plan


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
    spacing_hz : float
        Channel spacing, for the adjacent-channel checks (10 kHz: ITU Region 2).
    full_scale_dbm : float, optional
        Antenna power of a full-scale carrier for this capture (overrides
        the spec's ``frontend.full_scale_dbm``).
    thermal_noise : bool
        Add the front end's thermal noise F·k·T0 when the spec gives
        ``frontend.noise_figure_db`` (see :mod:`sdrx.dsp.thermal`); False
        leaves it out (noise-free bench measurements).

    Raises
    ------
    ParameterError
        Tuning outside the capture, unknown path, unusable IF rate; a noise
        figure without a full scale to place the noise in dBFS.
    """

    def __init__(self, design, info, tune_hz: float, path: str = "fast", agc_hold_gain_db=None,
                 first_sample: int = 0, if_rate_hz=None, spacing_hz: float = 10e3, full_scale_dbm=None,
                 thermal_noise: bool = True):
        if path not in PATHS:
            raise ParameterError(f"--path {path!r}: choose one of {', '.join(PATHS)}")
        self.design = design
        self.info = info
        self.tune_hz = float(tune_hz)
        self.path = path
        self.warnings: list = []
        self.full_scale_dbm = station_full_scale(design, full_scale_dbm)
        self.noise = self._thermal_noise(design.frontend, info) if thermal_noise else None
        lo, hi = info.band_hz
        self.plan = _checked_plan(design, info, tune_hz)
        self.fs_ch = self.plan.fs_ch
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
        self._if_rate = None
        if path == "exact":
            from .exact import resolve_if_rate

            self._if_rate = resolve_if_rate(design, self.plan, info, tune_hz, if_rate_hz)
        self._plan_preroll(first_sample)
        # the noise blanker works on the capture samples, ahead of the channelizer (fast) or of the
        # preselector and mixer (exact): the wideband signal, before any narrow filter
        self.blanker = NoiseBlanker(design.blanker, info.fs, first_sample) if design.blanker.enabled else None
        start = first_sample - self._pre_n      # the front end starts with the pre-roll
        self.monitor = ChannelMonitor(design, tune_hz, cover != "outside",
                                      0.0 if info.kind == "real" else info.center_hz, self.fs_ch, spacing_hz,
                                      self.plan.f_pass_hz, skip=self._pre_ch + self.plan.delay_out)
        self.checks = None      # the monitor's checks, once the run is complete
        self._monitor_ch = None
        if path == "fast":
            self.front = FastFrontEnd(design, self.plan, info.kind, info.center_hz, (lo, hi), tune_hz, start,
                                      extra=self.monitor.specs, on_extra=self.monitor.feed)
        else:
            from .exact import ExactFrontEnd

            self.front = ExactFrontEnd(design, self.plan, info, tune_hz, start, self._if_rate)
            self.warnings.extend(self.front.warnings)
            self._monitor_ch = Channelizer(self.plan, info.kind != "real", self.monitor.specs, first_sample=start)
        # the excerpt's first sample on the channel-rate grid of the whole capture (nearest sample
        # when the excerpt starts between two), less the pre-roll
        first_ch = int(round(first_sample * self.fs_ch / info.fs)) - self._pre_ch
        self.backend = Backend(design, self.fs_ch, agc_hold_gain_db, first_ch, freeze_ch=self._freeze_ch,
                               skip_ch=self._pre_ch)
        self.audio_fs = float(design.audio.rate_hz)
        self._ref = float(abs(design.rf_response(tune_hz, tune_hz)[0]))
        self._first = int(first_sample)
        self._n_in = 0
        self._n_out = 0
        self._drop = self.backend.resampler.delay_out + self._pre_audio
        self._flushed = False
        self._head = []        # the capture's first samples, kept until the carriers are estimated
        self._head_n = 0
        self._started = False
        self._n_u = 0          # channel-rate samples passed to the backend
        self._pool = None      # worker thread for the fast path's front end
        self._pending = None   # its output for the previous block

    def _plan_preroll(self, first_sample: int) -> None:
        """Size the pre-roll (see :mod:`.preroll`) on the capture, channel and audio grids."""
        design, fs = self.design, self.info.fs
        zpk = design.preselector.zpk(self.tune_hz)
        # the same for both paths (so that they start alike): the channelizer, the preselector, and
        # 2 ms for the exact path's RF synthesis and IF channelizer (about a millisecond each)
        front_s = self.plan.overlap / fs + (preroll._slowest_decay_s(zpk[1]) if zpk is not None else 0.0) + 2e-3
        hold_s, settle_s = preroll.preroll_seconds(design, front_s)
        hold_s += settle_window_s(design.agc) + AGC_STEP / self.fs_ch
        rates = [self.fs_ch, design.audio.rate_hz] + ([self._if_rate] if self._if_rate else [])
        self._pre_n = preroll.preroll_samples(hold_s + settle_s + AGC_STEP / self.fs_ch, fs, *rates,
                                              multiple_of=self.plan.hop)
        self._pre_ch = int(round(self._pre_n * self.fs_ch / fs))
        self._pre_audio = int(round(self._pre_n * design.audio.rate_hz / fs))
        self._freeze_ch = int(math.ceil(hold_s * self.fs_ch))
        self._estimate_n = max(16, int(round(preroll.ESTIMATE_S * fs)))

    def _carrier_windows(self):
        """The frequency ranges around the channels the receiver takes from the capture (in its own
        frequency axis): its channels' window and the skirt beyond it, where the channel filter still
        passes more than −100 dB (to 1.5 times the window's edge)."""
        off = 0.0 if self.info.kind == "real" else self.info.center_hz
        half = 1.5 * self.plan.f_stop_hz
        centres = [self.tune_hz]
        if image_coverage(self.design.image_hz(self.tune_hz), self.info.band_hz, self.plan) != "outside":
            centres.append(self.design.image_hz(self.tune_hz))
        return [(f - off - half, f - off + half) for f in centres]

    def _start(self) -> np.ndarray:
        """Estimate the carriers from the first samples and run the pre-roll; returns the audio it leaves
        (nothing: the pre-roll's audio is dropped) after the head samples are fed."""
        self._started = True
        head = np.concatenate(self._head) if self._head else np.zeros(0)
        self._head = []
        is_complex = self.info.kind != "real"
        carriers = preroll.estimate_carriers(head[:self._estimate_n], self.info.fs, is_complex)
        history = preroll.carrier_history(carriers, self._pre_n, self.info.fs, is_complex,
                                          near_hz=self._carrier_windows())
        dtype = np.complex64 if is_complex else np.float32
        out = [self._feed(history.astype(dtype), raw=False)]
        if len(head):
            out.append(self._feed(head))
        return np.concatenate(out)

    @staticmethod
    def check_station(design, info, tune_hz: float, full_scale_dbm=None) -> None:
        """Raise the ParameterError a (fast-path) Receiver of this station would raise, if any.

        The same checks as the constructor (the front end's noise, the tuning, the channel rate),
        without building the receiver's channel tables and filters: for choosing stations cheaply.
        ``full_scale_dbm`` is the ``--full-scale-dbm`` override, as for the constructor.
        """
        _check_full_scale(design.frontend, station_full_scale(design, full_scale_dbm))
        _checked_plan(design, info, tune_hz)

    def _thermal_noise(self, frontend, info):
        """The front end's noise source, or None when the spec gives no noise figure."""
        from ..dsp.thermal import ThermalNoise, thermal_density_dbfs_per_hz

        nf = frontend.noise_figure_db
        if nf is None:
            return None
        _check_full_scale(frontend, self.full_scale_dbm)
        density = thermal_density_dbfs_per_hz(nf, self.full_scale_dbm)
        return ThermalNoise(density, info.fs, info.kind, frontend.seed)

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
        if self.noise is not None:
            block = self.noise.add(block, self._first + self._n_in)
        self._n_in += len(block)
        if not self._started:
            self._head.append(np.array(block))
            self._head_n += len(block)
            return self._start() if self._head_n >= self._estimate_n else np.zeros(0)
        return self._feed(block)

    def _feed(self, block: np.ndarray, raw: bool = True) -> np.ndarray:
        """Capture samples (``raw``: through the blanker when it is on) or pre-roll (not ``raw``: made of
        clean carriers, it skips the blanker) through the front end and the back end."""
        if self.path != "fast":
            return self._out(self._back(self._front(block, raw)))
        if self._pool is None:
            from concurrent.futures import ThreadPoolExecutor

            self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="sdrx-front")
        fut = self._pool.submit(self._front, block, raw)
        out = self._back(self._pending) if self._pending is not None else np.zeros(0)
        self._pending = fut.result()
        return self._out(out)

    def _front(self, block: np.ndarray, raw: bool = True) -> np.ndarray:
        """Capture samples -> IF envelope: the blanker (when on), then the path's front end (and, in the
        exact path, the monitor's own channelizer)."""
        if raw and self.blanker is not None:
            block = self.blanker.process(block)
        if self._monitor_ch is not None:
            self.monitor.feed(self._monitor_ch.process(block))
        return self.front.process(block)

    def flush(self) -> np.ndarray:
        """End of input: return the remaining audio, so that the total is duration × audio rate."""
        head = self._start() if not self._started else np.zeros(0)
        self._flushed = True
        if self._pending is not None:
            head = np.concatenate([head, self._out(self._back(self._pending))])
            self._pending = None
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None
        if self.blanker is not None:
            # the samples the blanker held back (its look-ahead) go through the front end first
            head = np.concatenate([head, self._out(self._back(self._front(self.blanker.flush(), raw=False)))])
        if self.noise is not None:
            self.noise.close()
        target = int(math.floor(self._n_in * self.audio_fs / self.info.fs + 1e-9))
        # the front end's tail runs past the input (zero padding, so the filters ring down as
        # after a real end of signal); the level statistics count only the input's duration
        n_data_ch = int(math.ceil(self._n_in * self.fs_ch / self.info.fs - 1e-9))
        n_ch = self._pre_ch + n_data_ch
        self.monitor.end_at(n_data_ch)
        if self._monitor_ch is not None:
            self.monitor.feed(self._monitor_ch.process(np.zeros(self.plan.overlap, self._monitor_ch.dtype)))
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
        if self.noise is not None:
            self.noise.close()

    def _finish_warnings(self) -> None:
        self.checks = self.monitor.checks()
        self.warnings.extend(self.monitor.warnings(self.checks))
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
        out = {"carrier_dbfs": c, "agc_gain_db": g}
        out.update(self.stage_stats())
        return out

    def stage_stats(self) -> dict:
        """What the optional stages did, one entry each when it is on: ``blanker`` (pulses blanked,
        time blanked, over-threshold runs too long to be pulses), ``notch`` (fixed frequencies, tones
        found by the tracker), ``carrier_loop`` (synchronous detector: locked, frequency offset)."""
        out = {}
        nb = self.blanker
        if nb is not None:
            out["blanker"] = {"pulses": nb.pulses, "blanked_s": round(nb.blanked / self.info.fs, 6),
                              "not_blanked": nb.not_blanked}
        nt = self.backend.notch
        if nt is not None:
            span = self._n_in / self.info.fs   # the notch also sees the filters' ring-down past the end
            tones = [dict(t, end_s=min(t["end_s"], round(span, 4))) for t in nt.report()]
            out["notch"] = {"frequencies_hz": list(self.design.notch.frequencies_hz), "auto": nt.auto,
                            "tones": tones}
        det = self.backend.detector
        if hasattr(det, "locked"):
            off = det.offset_hz
            out["carrier_loop"] = {"locked": bool(det.locked),
                                   "offset_hz": None if not math.isfinite(off) else round(off, 3),
                                   "lock_fraction": round(det.lock_intervals / det.intervals, 4) if det.intervals else None,
                                   "sideband": self.design.detector.sideband}
        return out
