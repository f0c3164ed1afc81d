"""A clean start: the receiver is already tuned to the station when the capture begins.

A chain that starts from rest meets the first sample as a step: the carrier
switching on rings through the channel and IF filters, the AGC sees a level
that is still rising, and the audio high-pass starts from zero against the
detector's DC, a loud thump at the head of every output. A receiver that
had been on before the recording started shows none of this.

So the receiver runs a *pre-roll* first: the carriers present at the start
of the capture, continued backwards in time with their frequency, amplitude
and phase, fed through the whole chain and its output discarded. Every stage
is then in its steady state for the carriers when the real samples arrive,
and the carriers run on without a break in phase:

1. :func:`estimate_carriers` finds the carriers of the whole band in the
   first ``ESTIMATE_S`` of the capture: peaks of a Blackman-windowed,
   zero-padded spectrum, the frequency refined by parabolic interpolation of
   the log spectrum, the complex amplitude by the windowed DTFT at that
   frequency (Harris, "On the use of windows for harmonic analysis with the
   discrete Fourier transform", Proc. IEEE 66(1), 1978: the Blackman window's
   side lobes, −58 dB, keep the programme's sidebands and the neighbours out).
   Every carrier counts, not only those near the tune: a strong carrier that
   switched on at the first sample would put the channelizer's impulse
   response, scaled by about h_peak/Δω, into every channel (a click).
2. :func:`carrier_history` renders them for the samples before the start:
   those near the receiver's channels for the whole pre-roll, the others
   faded in smoothly just before the first sample.
3. :func:`preroll_seconds` sizes the pre-roll from the chain itself: the
   slowest pole of the IF stages (while the AGC holds its gain), then the
   slowest pole of the audio filters and the detector's own settling (after
   the AGC has settled on the carrier), each to −100 dB.

Programme, noise and stations away from the channels are not continued:
they start at the first sample as they would when a transmitter switches on,
which through the chain's filters is no click.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np
from scipy import signal

from ..limits import MAX_PREROLL_S, check_range
from ..units import format_frequency

__all__ = ["Carrier", "estimate_carriers", "carrier_history", "preroll_seconds", "preroll_samples",
           "ESTIMATE_S", "TILE_HZ", "FADE_S"]

#: how much of the capture's start the carriers are estimated from, s
ESTIMATE_S = 0.08
#: decay each stage is given before the next stage's settling starts: −100 dB
_SETTLE_NEPERS = math.log(1e5)
#: the band is searched for carriers in tiles this wide, each against its own median
TILE_HZ = 100e3
#: carriers away from the receiver's channels fade in between these times before the first sample, s
FADE_S = (0.004, 0.002)
_PEAK_DB = 20.0          # a carrier stands this far over the median of its tile
_RANGE_DB = 100.0        # and within this much of the strongest one (the window's side lobes are not carriers)
_MAX_PER_WINDOW = 24


@dataclass(frozen=True)
class Carrier:
    """A steady carrier: x[n] = amplitude · exp(j2π·f·(n − first)/fs) (I/Q), or its real part ×1 (real)."""

    freq_hz: float          # in the capture's own frequency axis (offset from the centre for I/Q)
    amplitude: complex      # complex amplitude at the first sample


def _window_peaks(p_db: np.ndarray, lo: int, hi: int, halfwidth: int):
    """Bins of local maxima in p_db[lo:hi] standing _PEAK_DB over the window's median (and within
    _RANGE_DB of the window's strongest: a window's carriers depend on that window and the main lobe
    beside it only)."""
    if hi - lo < 3:
        return []
    floor = float(np.median(p_db[lo:hi]))
    # maxima are judged against neighbours on both sides of the tile's edges (a carrier on an edge,
    # e.g. at a multiple of TILE_HZ, is its tile's); only those inside the tile are its own
    e_lo, e_hi = max(lo - halfwidth, 0), min(hi + halfwidth, len(p_db))
    big = signal.argrelmax(p_db[e_lo:e_hi], order=halfwidth, mode="clip")[0] + e_lo
    big = [int(k) for k in big if lo <= k < hi and 0 < k < len(p_db) - 1 and p_db[k] > floor + _PEAK_DB]
    big.sort(key=lambda k: -p_db[k])
    big = big[:_MAX_PER_WINDOW]
    if big:
        top = p_db[big[0]]
        big = [k for k in big if p_db[k] > top - _RANGE_DB]
    return big


def _blackman_transform(theta: np.ndarray, n: int) -> np.ndarray:
    """Σ_m w[m]·e^{−jθm} of numpy's n-point Blackman window, in closed form.

    w[m] = 0.42 − 0.5·cos(2πm/(n−1)) + 0.08·cos(4πm/(n−1)) (Harris 1978), each term a geometric sum.
    """
    def geometric(t):
        t = np.asarray(t, float)
        z = np.exp(-1j * t)
        small = np.abs(np.sin(t / 2)) < 1e-12
        with np.errstate(divide="ignore", invalid="ignore"):
            s = (1 - z ** n) / (1 - z)
        return np.where(small, complex(n), s)   # θ a whole number of turns: every term is 1
    a1, a2 = 2 * np.pi / (n - 1), 4 * np.pi / (n - 1)
    return (0.42 * geometric(theta) - 0.25 * (geometric(theta - a1) + geometric(theta + a1))
            + 0.04 * (geometric(theta - a2) + geometric(theta + a2)))


def estimate_carriers(x: np.ndarray, fs: float, is_complex: bool) -> list:
    """Steady carriers in x (the capture's first samples) over the whole captured band.

    The band is searched in tiles of ``TILE_HZ``, each against its own median,
    so the carriers found do not depend on who asks (one receiver or many).

    Parameters
    ----------
    x : ndarray
        The first samples (I/Q complex, or real).
    fs : float
        Sample rate, Hz.
    is_complex : bool

    Returns
    -------
    list of Carrier

    Notes
    -----
    The complex amplitude comes from the zero-padded spectrum at the peak's
    bin divided by the window's own transform at the offset between that bin
    and the interpolated frequency (the Blackman window's transform in closed
    form), which equals the windowed DTFT at the interpolated frequency.

    Examples
    --------
    >>> fs = 48000.0
    >>> n = np.arange(4800)
    >>> x = 0.1 * np.exp(1j * (2 * np.pi * 1234.5 * n / fs + 0.3))
    >>> c = estimate_carriers(x, fs, True)
    >>> round(c[0].freq_hz, 2), round(abs(c[0].amplitude), 4), round(float(np.angle(c[0].amplitude)), 3)
    (1234.5, 0.1, 0.3)
    """
    n = len(x)
    if n < 16:
        return []
    x = np.asarray(x, np.complex128 if is_complex else np.float64)
    w = np.blackman(n)
    nfft = 1 << int(math.ceil(math.log2(4 * n)))
    X = np.fft.fft(w * x, nfft)
    p_db = 10.0 * np.log10(np.abs(X) ** 2 + 1e-300)
    freqs = np.fft.fftfreq(nfft, 1.0 / fs)
    order = np.argsort(freqs, kind="stable")
    X, p_db, freqs = X[order], p_db[order], freqs[order]
    halfwidth = max(2, int(round(3.0 * nfft / n)))   # the Blackman main lobe: ±3 bins of the unpadded DFT
    lo_hz = -fs / 2 if is_complex else 0.0
    found = []
    for t0 in np.arange(lo_hz, fs / 2, TILE_HZ):
        lo, hi = np.searchsorted(freqs, [t0, min(t0 + TILE_HZ, fs / 2)])
        found += _window_peaks(p_db, int(lo), int(hi), halfwidth)
    carriers = []
    gain = 1.0 if is_complex else 0.5
    for k in sorted(set(found)):
        a, b, c = p_db[k - 1], p_db[k], p_db[k + 1]
        den = a - 2 * b + c
        delta = 0.5 * (a - c) / den if den < 0 else 0.0
        f = float(freqs[k] + delta * fs / nfft)
        theta = 2 * np.pi * (freqs[k] - f) / fs
        amp = complex(X[k] / (_blackman_transform(np.array([theta]), n)[0] * gain))
        carriers.append(Carrier(f, amp))
    return carriers


def _inside(f_hz: float, windows) -> bool:
    return any(lo <= f_hz <= hi for lo, hi in windows)


def carrier_history(carriers, count: int, fs: float, is_complex: bool, near_hz=None) -> np.ndarray:
    """The carriers over the ``count`` samples before the first one (indices −count … −1).

    Carriers inside ``near_hz`` (a list of (low, high) frequency ranges: the
    receiver's channels and their surroundings; None: all) run over the whole
    pre-roll; the others, which the receiver's channels do not pass, need
    only be on, without a click, when the first sample arrives: they fade in
    (raised cosine) from ``FADE_S[0]`` to ``FADE_S[1]`` before it.

    Examples
    --------
    >>> h = carrier_history([Carrier(1000.0, 1.0 + 0j)], 4, 8000.0, True)
    >>> np.round(h, 3).tolist()
    [(-1-0j), (-0.707-0.707j), -1j, (0.707-0.707j)]
    """
    n_fade = min(count, int(math.ceil(FADE_S[0] * fs)))
    near = [c for c in carriers if near_hz is None or _inside(c.freq_hz, near_hz)]
    far = [c for c in carriers if not (near_hz is None or _inside(c.freq_hz, near_hz))]
    out = _tone_sum(near, count, fs)
    if far and n_fade:
        out[count - n_fade:] += _fade_in(n_fade, fs) * _tone_sum(far, n_fade, fs)
    return out if is_complex else out.real.copy()


def _tone_sum(carriers, count: int, fs: float, block: int = 1024) -> np.ndarray:
    """Σ_k a_k·exp(j2π f_k n / fs) for n = −count … −1, every carrier at once.

    The samples are taken in blocks of ``block``: with n = n0 + m,
    exp(jωn) = exp(jωn0)·exp(jωm), so the whole sum is one matrix product of
    the (blocks × carriers) start phasors, amplitudes included, by the
    (carriers × block) phasor table: one pass of complex exponentials over
    blocks + block columns per carrier instead of ``count``.
    """
    if not carriers or count <= 0:
        return np.zeros(max(count, 0), complex)
    f = np.array([c.freq_hz for c in carriers], np.float64)
    a = np.array([c.amplitude for c in carriers], complex)
    nb = -(-count // block)
    n0 = -count + block * np.arange(nb, dtype=np.float64)
    starts = a[None, :] * np.exp(2j * np.pi * np.outer(n0, f) / fs)             # (blocks, carriers)
    table = np.exp(2j * np.pi * np.outer(f, np.arange(block, dtype=np.float64)) / fs)   # (carriers, block)
    return (starts @ table).reshape(-1)[:count]


def _fade_in(n: int, fs: float) -> np.ndarray:
    """Raised-cosine rise from FADE_S[0] to FADE_S[1] before the first sample, then 1 (n samples)."""
    t = (np.arange(-n, 0) + 0.5) / fs            # seconds before the first sample (negative)
    rise = FADE_S[0] - FADE_S[1]
    u = np.clip((t + FADE_S[0]) / rise, 0.0, 1.0)
    return 0.5 - 0.5 * np.cos(np.pi * u)


def _slowest_decay_s(poles_rad_s) -> float:
    """Time for the slowest of these analog poles to decay by 100 dB (0 when there are none)."""
    p = np.asarray(poles_rad_s, complex)
    sigma = -p.real[p.real < 0]
    return float(_SETTLE_NEPERS / sigma.min()) if len(sigma) else 0.0


def _audio_poles(audio) -> np.ndarray:
    hp = signal.butter(audio.highpass_order, 2 * math.pi * audio.highpass_hz, "highpass", analog=True, output="zpk")[1]
    lp = signal.butter(audio.lowpass_order, 2 * math.pi * audio.lowpass_hz, analog=True, output="zpk")[1]
    return np.concatenate([hp, lp])


def _detector_settle_s(det) -> float:
    if det.kind == "diode":
        return _SETTLE_NEPERS * det.rc_us * 1e-6
    if det.kind == "synchronous":
        # pull-in of the carrier loop from any phase: some ten periods of its bandwidth (common practice)
        return 10.0 / det.pll_bandwidth_hz
    return 0.0


def preroll_seconds(design, front_s: float = 0.0) -> tuple:
    """(hold_s, settle_s): the pre-roll's two parts for this chain.

    ``hold_s`` covers the front end's own filters (``front_s``) and the IF
    stages' slowest pole; the AGC holds its gain meanwhile and then settles on
    the carrier. ``settle_s`` then lets the audio filters and the detector
    settle at the new gain.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> hold, settle = preroll_seconds(design_chain("medium"))
    >>> 0.0001 < hold < 0.01, 0.02 < settle < 0.1
    (True, True)
    """
    if_poles = np.concatenate([st.p for st in design.stages]) if design.stages else np.zeros(0)
    hold = front_s + _slowest_decay_s(if_poles)
    settle = _slowest_decay_s(_audio_poles(design.audio)) + _detector_settle_s(design.detector)
    return hold, settle


def preroll_samples(seconds: float, fs: float, *other_rates: float, multiple_of: int = 1) -> int:
    """Smallest count ≥ seconds·fs whose duration is a whole number of samples at every other rate too,
    and a multiple of ``multiple_of`` (the channelizer's hop: its segments then fall where a run without
    the pre-roll would have them).

    Raises
    ------
    ParameterError
        When that count exceeds ``limits.MAX_PREROLL_S`` (rates in an awkward ratio).

    Examples
    --------
    >>> preroll_samples(0.01, 2.4e6, 96e3, 48e3)   # a multiple of 50 samples
    24000
    >>> preroll_samples(0.01, 2.4e6, 96e3, 48e3, multiple_of=11200)
    33600
    """
    grid = int(multiple_of)
    for r in other_rates:
        fr = (Fraction(r).limit_denominator(1000) / Fraction(fs).limit_denominator(1000))
        grid = grid * fr.denominator // math.gcd(grid, fr.denominator)
    n = int(math.ceil(seconds * fs - 1e-9))
    count = grid * int(math.ceil(n / grid))
    rates = ", ".join(format_frequency(r) for r in other_rates)
    check_range(count / fs, f"capture rate {format_frequency(fs)}: pre-roll", 0.0, MAX_PREROLL_S, unit="s",
                why=f"the shortest start on one sample grid with the receiver's rates {rates}; a capture rate in "
                    "a simpler ratio to them avoids it")
    return count
