"""What the detector hears: the carriers around the tune and on the image, and the channel's noise.

While the receiver runs, two flat channels of the capture (centred on the
tune and on the image frequency) are cut out beside the chain's own and
their power spectra are averaged over the whole run (Welch's method,
4-term Blackman-Harris frames; Harris, Proc. IEEE 66(1), 1978). From them:

- the **carrier** of each channel of interest: the strongest line within a
  quarter of the spacing of the channel frequency (as the band survey does),
  its power from the window's main lobe and its frequency by parabolic
  interpolation of the log spectrum;
- the **noise density around the wanted channel**, by minimum statistics:
  the spectrum averaged over blocks of a few frames, its minimum over the
  run per bin (programmes pause, the noise does not), and of those the
  quietest tenth across the flat part of the channel (the gaps between the
  stations' sidebands), corrected for the bias of that statistic (R. Martin,
  "Noise power spectral density estimation based on optimal smoothing and
  minimum statistics", IEEE Trans. Speech Audio Process. 9(5), 2001; the
  bias here is exact for white noise over independent blocks: a quantile of
  the minimum of M Gamma(K, 1/K) variables). A capture whose every bin near
  the channel carries programme all the time reads more noise than it has:
  the carrier's SNR then errs low, on the safe side;
- the checks: ``carrier_snr_db`` (carrier over the noise in the chain's
  equivalent noise bandwidth at RF), ``image_leak_db`` and ``adjacent_leak_db`` (a channel's
  carrier after the chain's response at its frequency, against the wanted
  carrier after the chain's response at the tune: what reaches the detector),
  ``tuning_error_hz`` (the carrier's offset from the tune).
"""

from __future__ import annotations

import math

import numpy as np
import scipy.fft as sfft
from scipy import integrate, signal, stats

from ..dsp.channelizer import ChannelSpec
from ..units import format_frequency

__all__ = ["ChannelMonitor", "noise_bandwidth_hz", "CARRIER_MIN_SNR_DB", "LEAK_WARN_DB", "TUNING_WARN_HZ"]

#: a carrier is missing below this much over the channel noise
CARRIER_MIN_SNR_DB = 10.0
#: an image or adjacent carrier this close to the wanted one (or closer) at the detector is reported
LEAK_WARN_DB = -30.0
#: a carrier further than this from the tune is reported
TUNING_WARN_HZ = 50.0
_FRAME = 4096
_HOP = 2048
_BLOCK_FRAMES = 4        # frames averaged before the running minimum (about 0.1 s at 96 kHz)
_LOBE = 4                # half-width of the window's main lobe, bins (4-term Blackman-Harris)
_STACK = 16             # spectra fed as one array (bounds the temporaries: a few MB per block)
_NOISE_QUANTILE = 0.1    # the quietest tenth of the bins near the channel holds only noise


def noise_bandwidth_hz(design, tune_hz: float, span_hz: float = 60e3) -> float:
    """Equivalent noise bandwidth of the chain at RF, ∫|H(f)|²df / |H(tune)|², over tune ± span.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> 4000 < noise_bandwidth_hz(design_chain("medium"), 1e6) < 8000
    True
    """
    f = tune_hz + np.linspace(-span_hz, span_hz, 24001)
    h2 = np.abs(design.rf_response(f, tune_hz)) ** 2
    h0 = abs(design.rf_response(tune_hz, tune_hz)[0]) ** 2
    return float(integrate.trapezoid(h2, f) / h0)


class _Spectrum:
    """Running Welch average and block-minimum of one complex channel.

    The sums and minima are kept in the FFT's own bin order (0 Hz first); :meth:`mean` and
    :attr:`freqs` give them from the lowest frequency up.
    """

    def __init__(self, fs: float):
        self.fs = fs
        self.win = signal.windows.blackmanharris(_FRAME)
        self._buf = np.zeros(0, complex)
        self.sum = np.zeros(_FRAME)
        self.frames = 0
        self._block = np.zeros(_FRAME)
        self._block_n = 0
        self.minimum = None
        self.blocks = 0

    def feed(self, z: np.ndarray) -> None:
        feed_spectra([(self, z)])

    def _key(self, n_new: int) -> tuple:
        """Spectra with equal keys are at the same point of their runs: they can be fed as one array."""
        return len(self._buf), n_new, self.frames, self._block_n, self.blocks, self.minimum is None

    @property
    def freqs(self) -> np.ndarray:
        return sfft.fftshift(sfft.fftfreq(_FRAME, 1.0 / self.fs))

    def mean(self) -> np.ndarray:
        return sfft.fftshift(self.sum) / max(self.frames, 1)

    def line(self, centre_hz: float, half_hz: float):
        """(power, frequency) of the strongest line within centre ± half, or None."""
        if not self.frames:
            return None
        f, p = self.freqs, self.mean()
        sel = np.nonzero(np.abs(f - centre_hz) <= half_hz)[0]
        sel = sel[(sel > _LOBE) & (sel < _FRAME - _LOBE - 1)]
        if not len(sel):
            return None
        k = int(sel[np.argmax(p[sel])])
        a, b, c = (10 * np.log10(p[k + d] + 1e-300) for d in (-1, 0, 1))
        den = a - 2 * b + c
        delta = 0.5 * (a - c) / den if den < 0 else 0.0
        power = float(np.sum(p[k - _LOBE:k + _LOBE + 1]) / np.sum(self.win ** 2) / _FRAME)
        return power, float(f[k] + delta * self.fs / _FRAME)

    def noise_per_hz(self, half_hz: float):
        """Noise power density (per Hz) by minimum statistics over ± half_hz of the centre, or None.

        The quietest tenth of the bins, by their minimum over the run: the gaps between the
        stations' sidebands, where only the noise is, also in a channel whose programme never
        pauses. The bias is corrected exactly for white noise over independent blocks.
        """
        if self.minimum is None:
            return None
        band = np.abs(sfft.fftfreq(_FRAME, 1.0 / self.fs)) <= half_hz     # the bins in the FFT's order
        m = self.minimum[band]
        if len(m) < 16:
            return None
        q = _NOISE_QUANTILE
        bias = stats.gamma.ppf(1.0 - (1.0 - q) ** (1.0 / self.blocks), _BLOCK_FRAMES, scale=1.0 / _BLOCK_FRAMES)
        per_bin = float(np.quantile(m, q)) / bias          # E|X_k|² of the noise
        # white noise of density N0 (per Hz) has E|x|² = N0·fs per sample and E|X_k|² = N0·fs·Σw²
        return per_bin / (float(np.sum(self.win ** 2)) * self.fs)


def feed_spectra(pairs) -> None:
    """Feed each (spectrum, new samples) pair, the spectra at the same point of their runs together.

    Those are stacked into one spectra × frames × frame array: one FFT call for all, and one pass of
    the running sums and block minima per frame over all of them at once. Every spectrum's values come
    from the same elementwise operations in the same order as when it is fed alone.
    """
    alike: dict = {}
    for sp, z in pairs:
        alike.setdefault(sp._key(len(z)), []).append((sp, z))
    for group in alike.values():
        for i in range(0, len(group), _STACK):
            part = group[i:i + _STACK]
            _feed_alike([sp for sp, _ in part], np.stack([np.concatenate([sp._buf, z]) for sp, z in part]))


def _feed_alike(spectra, buf: np.ndarray) -> None:
    first = spectra[0]
    n = (buf.shape[1] - _FRAME) // _HOP + 1 if buf.shape[1] >= _FRAME else 0
    if n > 0:
        view = np.lib.stride_tricks.sliding_window_view(buf[:, :(n - 1) * _HOP + _FRAME], _FRAME, axis=1)[:, ::_HOP]
        p = np.abs(sfft.fft(view * first.win, axis=-1)) ** 2     # (spectra, n, frame), the FFT's bin order
        total = np.stack([sp.sum for sp in spectra])
        block = np.stack([sp._block for sp in spectra])
        minimum = None if first.minimum is None else np.stack([sp.minimum for sp in spectra])
        frames, block_n, blocks = first.frames, first._block_n, first.blocks
        for r in range(n):
            row = p[:, r, :]
            total += row
            frames += 1
            block += row
            block_n += 1
            if block_n == _BLOCK_FRAMES:
                avg = block / _BLOCK_FRAMES
                minimum = avg if minimum is None else np.minimum(minimum, avg)
                blocks += 1
                block[:] = 0.0
                block_n = 0
        for k, sp in enumerate(spectra):
            sp.sum, sp._block = total[k], block[k]
            sp.minimum = None if minimum is None else minimum[k]
            sp.frames, sp._block_n, sp.blocks = frames, block_n, blocks
    for k, sp in enumerate(spectra):
        sp._buf = buf[k, n * _HOP:] if n > 0 else buf[k]


class ChannelMonitor:
    """Carriers and channel noise around the tune and on the image, for the run summary's checks.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    image_in_capture : bool
        Whether the image channel is cut out too.
    offset_hz : float
        The capture's frequency axis offset (its centre for I/Q, 0 for real).
    fs_ch : float
        The channels' rate, Hz.
    spacing_hz : float
        Channel spacing (for the ±1, ±2 channels).
    pass_hz : float
        The channels are flat to ± this (the channelizer's passband); the noise is sought there.
    skip : int
        Channel samples to leave out at the start (pre-roll and FIR delay).
    """

    def __init__(self, design, tune_hz: float, image_in_capture: bool, offset_hz: float, fs_ch: float,
                 spacing_hz: float, pass_hz: float, skip: int = 0):
        self.pass_hz = float(pass_hz)
        self.design = design
        self.tune_hz = tune_hz
        self.image_hz = design.image_hz(tune_hz)
        self.spacing_hz = float(spacing_hz)
        self.fs_ch = fs_ch
        centres = [tune_hz] + ([self.image_hz] if image_in_capture else [])
        self.specs = [ChannelSpec(f - offset_hz) for f in centres]
        self.spectra = [_Spectrum(fs_ch) for _ in centres]
        self._skip = int(skip)
        self._limit = math.inf      # channel samples (after the skip) that belong to the input
        self._n = 0

    def end_at(self, n_valid: int) -> None:
        """Count only the first ``n_valid`` channel samples after the skip (the rest is ring-down)."""
        self._limit = int(n_valid)

    def feed(self, outs) -> None:
        """The monitor channels' new samples, in the order of :attr:`specs`."""
        feed_spectra(self.take(outs))

    def take(self, outs) -> list:
        """The (spectrum, samples) pairs these new monitor-channel samples feed (the skip and the limit
        applied); for :func:`feed_spectra` over many monitors at once."""
        if not outs or not len(outs[0]):
            return []
        n = len(outs[0])
        lo = min(self._skip, n)
        self._skip -= lo
        hi = int(min(n, lo + max(0, self._limit - self._n)))
        self._n += max(0, hi - lo)
        if hi <= lo:
            return []
        return [(sp, np.asarray(z[lo:hi])) for sp, z in zip(self.spectra, outs)]

    # -- the checks ------------------------------------------------------------------------------
    def _h2(self, f_hz: float) -> float:
        return float(abs(self.design.rf_response(f_hz, self.tune_hz)[0]) ** 2)

    def checks(self) -> dict:
        """``carrier_snr_db``, ``image_leak_db``, ``adjacent_leak_db``, ``tuning_error_hz``, ``spacing_hz``."""
        sp = self.spectra[0]
        quarter = self.spacing_hz / 4
        wanted = sp.line(0.0, quarter)
        out = {"carrier_snr_db": None, "image_leak_db": None, "adjacent_leak_db": {},
               "tuning_error_hz": None, "spacing_hz": self.spacing_hz}
        for k in (-2, -1, 1, 2):
            out["adjacent_leak_db"][str(int(round(k * self.spacing_hz)))] = None
        if wanted is None:
            return out
        c_w, df_w = wanted
        ref = c_w * self._h2(self.tune_hz + df_w)
        n0 = sp.noise_per_hz(self.pass_hz)
        noise = n0 * noise_bandwidth_hz(self.design, self.tune_hz) if n0 else None
        if noise:
            out["carrier_snr_db"] = _db(c_w / noise)
        if out["carrier_snr_db"] is None or out["carrier_snr_db"] >= CARRIER_MIN_SNR_DB:
            out["tuning_error_hz"] = round(df_w, 1)   # a line in the noise has no frequency to speak of

        def leak(spectrum, f0_hz, centre_hz):
            line = spectrum.line(centre_hz, quarter)
            # a carrier there at all: CARRIER_MIN_SNR_DB over the noise, as for the wanted one
            if line is None or (noise and line[0] < noise * 10 ** (CARRIER_MIN_SNR_DB / 10)):
                return None
            return _db(line[0] * self._h2(f0_hz + line[1]) / ref)

        for k in (-2, -1, 1, 2):
            out["adjacent_leak_db"][str(int(round(k * self.spacing_hz)))] = leak(sp, self.tune_hz, k * self.spacing_hz)
        if len(self.spectra) > 1:
            out["image_leak_db"] = leak(self.spectra[1], self.image_hz, 0.0)
        return out

    def warnings(self, checks: dict) -> list:
        """The checks in words, with their numbers."""
        snr = checks["carrier_snr_db"]
        if snr is not None and snr < CARRIER_MIN_SNR_DB:
            # without a carrier the other figures have nothing to be measured against
            return [f"no carrier at {format_frequency(self.tune_hz)}: the strongest line near it is only "
                    f"{snr:.1f} dB over the channel noise (a carrier needs {CARRIER_MIN_SNR_DB:g} dB)"]
        out = []
        im = checks["image_leak_db"]
        if im is not None and im > LEAK_WARN_DB:
            what = ("what you hear is mostly the image station" if im >= 0 else
                    "expect it as interference, and a whistle where the two carriers beat")
            out.append(f"the image channel {format_frequency(self.image_hz)} reaches the detector {_rel(im)} "
                       f"the wanted carrier: {what}")
        for off, v in checks["adjacent_leak_db"].items():
            if v is not None and v > LEAK_WARN_DB:
                f = format_frequency(self.tune_hz + float(off))
                out.append(f"the adjacent channel {f} ({float(off) / 1e3:+g} kHz) reaches the detector "
                           f"{_rel(v)} the wanted carrier: expect its splatter")
        err = checks["tuning_error_hz"]
        if err is not None and abs(err) > TUNING_WARN_HZ:
            side = "above" if err > 0 else "below"
            out.append(f"the carrier is {abs(err):.0f} Hz {side} the tune, at {format_frequency(self.tune_hz + err)} "
                       f"(more than {TUNING_WARN_HZ:g} Hz): tune to it")
        return out


def _db(x: float) -> float:
    return round(10.0 * math.log10(max(x, 1e-30)), 1)


def _rel(db: float) -> str:
    return f"{abs(db):.1f} dB {'below' if db < 0 else 'above'}" if abs(db) >= 0.05 else "as strong as"
