"""Exact path: a real IF signal at an IF sample rate that holds every mixing product.

1. The capture becomes the real RF signal at the IF sample rate fs_if, with
   the preselector applied on the way (frequency-domain overlap-save: each
   input bin moved to its absolute RF frequency, weighted by the preselector's
   analog response, inverse real FFT at the higher rate).
2. The mixer really multiplies: r·cos(2π f_LO t) (real), or
   r·(cos + jsγ sin(·+φ)) for a quadrature (image-reject) mixer with
   imbalance, s = +1 high-side, −1 low-side. The image folds onto the IF.
3. Each IF stage is its analog prototype discretised at fs_if with the
   matched-z transform (gain matched at the IF).
4. The channelizer brings the IF output down to the channel rate as the
   complex envelope around +f_IF, which feeds the same AGC, detector and
   audio code as the fast path.

fs_if is chosen above 2·(top of the captured band + f_LO), so that no sum
product aliases, at a multiple of fs/8 whose ratios to the capture and
channel rates have only the factors 2, 3 and 5 (fast FFT sizes).

Notes
-----
Everything at the IF rate (RF, LO, mixer, IF stages, the channelizer's
input) runs in single precision: the work there is several times that of the
fast path, and float32 keeps it near memory speed. The stages' coefficients
are the matched-z sections rounded to float32 (a relative pole shift of about
1e-7, far inside the 0.1 dB the tests allow), and the rounding noise of the
recursions lies some 100 dB below full scale; the fast and exact paths still
agree to about 58 dB on the tests' multi-station captures.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import scipy.fft as sfft
from scipy import signal

from ..errors import ParameterError
from ..limits import MAX_IF_RATE_HZ, MAX_IF_RATE_RATIO
from ..units import format_frequency
from ..dsp.channelizer import ChannelSpec, Channelizer, passband_window, plan_channelizer
from ..dsp.discretize import matched_z

__all__ = ["ExactFrontEnd", "choose_if_rate", "resolve_if_rate"]

TWO_PI = 2.0 * math.pi


def _smooth(n: int) -> bool:
    """True when n has no prime factor above 5 (fast FFT sizes)."""
    for p in (2, 3, 5):
        while n % p == 0:
            n //= p
    return n == 1


def choose_if_rate(fs: float, band_top_hz: float, lo_hz: float, fs_ch: float = 96e3) -> float:
    """IF sample rate: the smallest multiple of fs/8 above 2.1·(band top + LO) whose ratio to
    the capture rate and to the channel rate has only factors 2, 3 and 5 (fast FFT sizes).

    Examples
    --------
    >>> choose_if_rate(2.4e6, 2.4e6, 1.455e6)   # 2.1·3.855 MHz = 8.1 MHz, 8.1M/96k = 3³·5²/2³
    8100000.0
    """
    need = max(fs, 2.1 * (band_top_hz + lo_hz))
    step = Fraction(fs).limit_denominator(1000) / 8
    j = math.ceil(Fraction(need).limit_denominator(1000) / step)
    for k in range(j, j + 4096):
        rate = step * k
        r_ch = rate / Fraction(fs_ch).limit_denominator(1000)
        u = rate / Fraction(fs).limit_denominator(1000)
        if (_smooth(r_ch.numerator) and r_ch.denominator <= 64 and _smooth(u.numerator)
                and (u * 8192).denominator == 1):
            return float(rate)
    return float(step * j)  # pragma: no cover - a 5-smooth multiple always turns up


def resolve_if_rate(design, plan, info, tune_hz: float, if_rate_hz=None) -> float:
    """The IF sample rate of the exact path: ``if_rate_hz`` checked, or the automatic choice.

    Raises
    ------
    ParameterError
        A given rate that cannot hold the IF, the LO or every mixing product, or that is not a
        usable multiple of the capture rate.
    """
    lo_band, hi_band = info.band_hz
    f_lo = design.lo_hz(tune_hz)
    if_hz = design.if_hz
    top_product = hi_band + f_lo
    if if_rate_hz is None:
        fs_if = choose_if_rate(info.fs, hi_band, f_lo, plan.fs_ch)
    else:
        fs_if = float(if_rate_hz)
        if if_hz >= fs_if / 2:
            raise ParameterError(
                f"--if-rate {format_frequency(fs_if)}: the IF {format_frequency(if_hz)} is above half the IF sample rate"
            )
        if f_lo >= fs_if / 2:
            raise ParameterError(
                f"--if-rate {format_frequency(fs_if)}: the LO {format_frequency(f_lo)} falls outside what "
                f"that rate can represent (needs above {format_frequency(2 * f_lo)})"
            )
        if 2 * top_product >= fs_if:
            raise ParameterError(
                f"--if-rate {format_frequency(fs_if)}: too low to hold every mixing product of the captured band "
                f"(needs above {format_frequency(2 * top_product)})"
            )
        # the RF synthesizer's segments need fs_if·512/fs whole, the IF channelizer a small
        # ratio fs_if/fs_ch (the same conditions the automatic choice meets)
        u = Fraction(fs_if).limit_denominator(1000) / Fraction(info.fs).limit_denominator(1000)
        r_ch = (Fraction(fs_if).limit_denominator(1000)
                / Fraction(plan.fs_ch).limit_denominator(1000)).limit_denominator(4096)
        if (u * 512).denominator != 1 or r_ch.denominator > 512 or abs(float(u) * info.fs - fs_if) > 1e-6 * fs_if:
            auto = choose_if_rate(info.fs, hi_band, f_lo, plan.fs_ch)
            raise ParameterError(
                f"--if-rate {fs_if:.10g}: not a usable IF sample rate for the capture rate {format_frequency(info.fs)} "
                f"(use a multiple of {format_frequency(info.fs / 512)}, such as the automatic {auto:.10g})"
            )
    _check_if_rate(fs_if, info.fs, if_rate_hz is None)
    return fs_if


def _check_if_rate(fs_if: float, fs: float, automatic: bool) -> None:
    """The IF sample rate's bounds (:mod:`sdrx.limits`): each capture block becomes fs_if/fs times as
    many IF samples, held while they are mixed and filtered."""
    what = "the automatic IF sample rate" if automatic else "--if-rate"
    hint = "; the fast path has no IF sample rate (--path fast)"
    if fs_if > MAX_IF_RATE_HZ:
        raise ParameterError(f"--path exact: {what} {format_frequency(fs_if)} is above {format_frequency(MAX_IF_RATE_HZ)}"
                             f"{hint}")
    if fs_if > MAX_IF_RATE_RATIO * fs:
        raise ParameterError(
            f"--path exact: {what} {format_frequency(fs_if)} is {fs_if / fs:.4g} times the capture rate "
            f"{format_frequency(fs)}; at most {MAX_IF_RATE_RATIO} times (memory per block){hint}")


class _RfSynthesizer:
    """Capture samples -> real RF at fs_if, preselector applied (overlap-save)."""

    def __init__(self, fs, fs_if, kind, center_hz, pre_response, overlap, first_sample):
        self.kind = kind
        U = Fraction(fs_if).limit_denominator(1000) / Fraction(fs).limit_denominator(1000)
        n_s = 8192
        while n_s < 4 * overlap:
            n_s *= 2
        if (U * n_s).denominator != 1 or int(U * n_s) % 2:
            raise ParameterError(f"IF sample rate {format_frequency(fs_if)} is not a usable multiple of the capture rate {format_frequency(fs)}")
        self.U = U
        self.n_s, self.p_s = n_s, overlap
        self.l_s = n_s - overlap
        self.n_o = int(U * n_s)
        self.p_o = int(U * overlap)
        self.l_o = self.n_o - self.p_o
        if (U * overlap).denominator != 1 or (U * overlap / 2).denominator != 1:
            raise ParameterError(f"IF sample rate {format_frequency(fs_if)} is not a usable multiple of the capture rate {format_frequency(fs)}")
        self.fs, self.fs_if = fs, fs_if
        df = fs / n_s
        if kind == "iq":
            kc_exact = center_hz / df
            self.kc = int(round(kc_exact))
            self.shift_hz = center_hz - self.kc * df   # done by an oscillator at the capture rate
            f_in = np.fft.fftfreq(n_s, 1.0 / fs)
            k_in = np.fft.fftfreq(n_s, 1.0 / n_s).astype(int)
            k_out = k_in + self.kc
            f_rf = k_out * df
            w = passband_window(f_in, 0.49 * fs, 0.5 * fs)
        else:
            self.kc = 0
            self.shift_hz = 0.0
            k_in = np.arange(n_s // 2 + 1)
            k_out = k_in
            f_rf = k_in * df
            w = passband_window(f_rf, 0.49 * fs, 0.5 * fs)
        # no RF below a few kHz: taper to zero at DC
        w = w * np.clip((f_rf - 5e3) / 15e3, 0.0, 1.0)
        ok = (k_out > 0) & (k_out < self.n_o // 2) & (w > 0)
        G = np.zeros(len(k_in), complex)
        G[ok] = w[ok] * pre_response(f_rf[ok])
        # prototype: response G at absolute RF, as an FIR of P+1 taps centred at P/2 (input samples)
        # build the time-domain filter in the capture's own frequency axis (offset by the centre)
        if kind == "iq":
            g_full = np.fft.ifft(G)
        else:
            g_full = np.fft.irfft(G, n_s)
        n = np.arange(-overlap // 2, overlap // 2 + 1)
        g = g_full[n % n_s] * signal.windows.tukey(overlap + 1, 0.3)
        Gs = np.fft.fft(g, n_s) if kind == "iq" else np.fft.rfft(g, n_s)
        self.k_in = k_in[ok]
        self.k_out = k_out[ok]
        self.H = (Gs[ok] * (0.5 if kind == "iq" else 1.0) * float(U)).astype(np.complex64)
        dtype = np.complex64 if kind == "iq" else np.float32
        self._dtype = dtype
        self._buf = np.zeros(overlap, dtype)
        self._start = first_sample - overlap      # absolute index of _buf[0]
        self._drop = self.p_o // 2                # FIR centring delay at fs_if
        self.out_start = first_sample * U         # absolute IF-rate index of the first output sample

    def process(self, x, final=False):
        x = np.asarray(x, self._dtype)
        if self.shift_hz:
            n = self._start + len(self._buf) + np.arange(len(x))
            x = (x * np.exp(1j * TWO_PI * self.shift_hz * (n.astype(np.float64) / self.fs))).astype(self._dtype)
        self._buf = np.concatenate([self._buf, x])
        n_seg = (len(self._buf) - self.p_s) // self.l_s
        outs = []
        for b0 in range(0, n_seg, 8):
            b = min(8, n_seg - b0)
            view = np.lib.stride_tricks.sliding_window_view(
                self._buf[b0 * self.l_s: b0 * self.l_s + (b - 1) * self.l_s + self.n_s], self.n_s)[::self.l_s]
            X = sfft.fft(view, axis=1, workers=2) if self.kind == "iq" else sfft.rfft(view, axis=1, workers=2)
            Y = np.zeros((b, self.n_o // 2 + 1), np.complex64)
            Y[:, self.k_out] = X[:, self.k_in] * self.H
            # the centre shift by kc bins, applied after the filter, needs each segment's phase
            # kc·(start − P/2)/n_s cycles: the absolute start, less the filter delay that is dropped
            if self.kind == "iq" and self.kc:
                starts = self._start + (b0 + np.arange(b, dtype=np.int64)) * self.l_s - self.p_s // 2
                ph = np.exp(1j * TWO_PI * ((self.kc * (starts % self.n_s)) % self.n_s) / self.n_s)
                Y *= ph.astype(np.complex64)[:, None]
            r = sfft.irfft(Y, self.n_o, axis=1, workers=2)[:, self.p_o:]
            outs.append(r.reshape(-1))
        consumed = n_seg * self.l_s
        self._buf = self._buf[consumed:]
        self._start += consumed
        r = np.concatenate(outs) if outs else np.zeros(0)
        if self._drop:
            k = min(self._drop, len(r))
            r = r[k:]
            self._drop -= k
        return r

    def flush(self):
        pad = self.p_s + ((-(len(self._buf))) % self.l_s)
        return self.process(np.zeros(pad, self._dtype))


class ExactFrontEnd:
    """Capture samples -> IF output complex envelope at the channel rate, through a real IF."""

    CHUNK = 1 << 16

    def __init__(self, design, plan, info, tune_hz, first_sample=0, if_rate_hz=None):
        self.design = design
        self.warnings: list = []
        fs_if = resolve_if_rate(design, plan, info, tune_hz, if_rate_hz)
        f_lo = design.lo_hz(tune_hz)
        self.fs_if = fs_if
        self.f_lo = f_lo
        pre = design.preselector
        zpk = pre.zpk(tune_hz)
        overlap = 1024
        if zpk is not None:
            sigma = float(np.min(-np.real(zpk[1])))
            need = int(math.ceil(12.0 / sigma * info.fs))
            while overlap < need:
                overlap *= 2
        self.synth = _RfSynthesizer(info.fs, fs_if, info.kind, info.center_hz,
                                    lambda f: pre.response(f, tune_hz), overlap, first_sample)
        self.quadrature = design.mixer.kind == "quadrature"
        self.gamma = design.mixer.gamma
        self.phi = design.mixer.phi_rad
        self.sgn = 1.0 if design.injection == "high" else -1.0
        self._n_if = int(self.synth.out_start)    # absolute IF-rate index of the next sample
        self._lo_cycles = Fraction(f_lo) / Fraction(fs_if)   # exact: the LO is never rounded
        q = self._lo_cycles.denominator
        if q <= (1 << 21):
            # the LO repeats every q samples: one period of cos (and sin) in a table
            k = np.arange(q)
            ph = TWO_PI * ((self._lo_cycles.numerator * k) % q) / q
            self._lo_table = np.cos(ph).astype(np.float32)
            self._lo_table_q = ((self.sgn * self.gamma * np.sin(ph + self.phi)).astype(np.float32)
                                if self.quadrature else None)
            self._lo_q = q
        else:
            self._lo_table = None

        sos = []
        for st in design.stages:
            zd, pd, kd = matched_z(st.z, st.p, st.k, fs_if, st.f0_hz)
            # a real filter cannot match the phase too: match the magnitude at the IF
            sos.append(signal.zpk2sos(zd, pd, float(abs(kd)) * (1.0 if np.real(kd) >= 0 else -1.0)))
        self.sos = np.vstack(sos).astype(np.float32)   # single precision at the IF rate (module Notes)
        zdt = np.complex64 if self.quadrature else np.float32
        self.zi = np.zeros((self.sos.shape[0], 2), zdt)
        self.plan_if = plan_channelizer(fs_if, plan.fs_ch)
        self.channelizer = Channelizer(self.plan_if, self.quadrature, [ChannelSpec(design.if_hz)],
                                       first_sample=self._n_if, batch=8,
                                       dtype=np.complex64 if self.quadrature else np.float32)
        self._drop = self.plan_if.delay_out
        self._pool = None
        self._pending = None     # RF of the chunk waiting for the mixer
        self._pending_y = None   # IF output waiting for the channelizer

    def _lo_slice(self, name: str, off: int, n: int):
        """n samples of a periodic LO table from offset off (tables are extended once, as needed)."""
        table = getattr(self, name)
        if off + n > len(table):
            q = self._lo_q
            table = np.tile(table[:q], (off + n + q - 1) // q + 1)
            setattr(self, name, table)
        return table[off:off + n]

    def _lo_phase(self, n0: int, length: int) -> np.ndarray:
        # exact fractional cycles at the block start, then a float ramp
        c = self._lo_cycles
        start = float((c * n0) % 1)
        return TWO_PI * (start + float(c) * np.arange(length))

    def _mix_and_filter(self, r: np.ndarray) -> np.ndarray:
        if len(r) == 0:
            return np.zeros(0)
        if self._lo_table is not None:
            off = self._n_if % self._lo_q
            c = self._lo_slice("_lo_table", off, len(r))
            if self.quadrature:
                m = r * (c + 1j * self._lo_slice("_lo_table_q", off, len(r)))
            else:
                m = r * c
        else:
            ph = self._lo_phase(self._n_if, len(r))
            if self.quadrature:
                m = r * (np.cos(ph) + 1j * self.sgn * self.gamma * np.sin(ph + self.phi))
            else:
                m = r * np.cos(ph)
        self._n_if += len(r)
        y, self.zi = signal.sosfilt(self.sos, m, zi=self.zi)
        return y

    def _down(self, outs):
        u = outs[0]
        if self._drop:
            k = min(self._drop, len(u))
            u = u[k:]
            self._drop -= k
        return u

    def _down_chan(self, y):
        return self._down(self.channelizer.process(y))

    def process(self, x):
        """Feed capture samples; returns the IF envelope completed so far.

        Three stages run as a pipeline over chunks of the input: the RF
        synthesis of chunk i and the IF channelizer of chunk i−2 run in worker
        threads (FFTs, which release the GIL) while the mixer and IF stages
        work on chunk i−1. Each stage still sees its chunks in order, so the
        output is the same as without the threads; it lags by two chunks, and
        :meth:`flush` returns the rest.
        """
        if self._pool is None:
            from concurrent.futures import ThreadPoolExecutor

            self._pool = ThreadPoolExecutor(max_workers=2, thread_name_prefix="sdrx-exact")
        outs = []
        # pieces of CHUNK capture samples keep the IF-rate arrays a few MB, which the
        # allocator reuses instead of mapping fresh pages for every block
        for i in range(0, len(x), self.CHUNK):
            f_rf = self._pool.submit(self.synth.process, x[i:i + self.CHUNK])
            f_ch = self._pool.submit(self._down_chan, self._pending_y) if self._pending_y is not None else None
            y = self._mix_and_filter(self._pending) if self._pending is not None else None
            if f_ch is not None:
                outs.append(f_ch.result())
            self._pending_y = y
            self._pending = f_rf.result()
        return np.concatenate(outs) if outs else np.zeros(0, complex)

    def close(self):
        """Stop the worker threads; idempotent."""
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None

    def flush(self):
        parts = []
        if self._pending_y is not None:
            parts.append(self._down_chan(self._pending_y))
            self._pending_y = None
        if self._pending is not None:
            parts.append(self._down_chan(self._mix_and_filter(self._pending)))
            self._pending = None
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None
        y = self._mix_and_filter(self.synth.flush())
        parts.append(self._down(self.channelizer.process(y)))
        a = np.concatenate(parts)
        b = self._down(self.channelizer.process(np.zeros(self.plan_if.overlap, self.channelizer.dtype)))
        c = self._down(self.channelizer.flush())
        return np.concatenate([a, b, c])
