"""The chain's overall audio response and its audio bandwidth, measured with test tones through the chain.

*Audio bandwidth* in sdrx has one meaning, :data:`AUDIO_BANDWIDTH_DEFINITION`: the highest modulating
frequency at which the chain's audio output is 3 dB below its output at 1 kHz, for AM test tones of equal
depth at the antenna, with the AGC held (the chain's overall audio-frequency response, antenna to audio
output: IF selectivity on the sidebands, detector, audio filters, resampler). ``sdrx compare`` shows it for
every chain and ``sdrx refs`` records it for every case; both call :func:`audio_bandwidth_hz`. What the
programme itself occupies is a different figure with a different name (the refs manifest's
``occupied_bandwidth_hz``).

The measurement is one run of the actual :class:`sdrx.run.Receiver` on a short I/Q test capture made in
code (centred on the tune, at least 240 kS/s and 2.5 times the audio rate): a carrier at the tune, amplitude modulated by a comb of tones 1/24 octave apart from 50 Hz to 40 % of
the audio rate, each on the frequency grid of the analysis window so that a rectangular-window FFT reads
every tone's amplitude without leakage; Schroeder phases keep the summed modulation's peak low, so the
envelope never nears zero and the detector works as on a single tone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np

from ..units import db20

__all__ = [
    "AUDIO_BANDWIDTH_DEFINITION",
    "AUDIO_BANDWIDTH_DB",
    "REFERENCE_HZ",
    "AudioResponse",
    "comb_frequencies",
    "measure_audio_response",
    "audio_bandwidth_hz",
]

#: How far below the 1 kHz output the audio bandwidth's edge lies, dB.
AUDIO_BANDWIDTH_DB = 3.0
#: The modulating frequency the response is referred to, Hz.
REFERENCE_HZ = 1000.0
#: The one definition of "audio bandwidth" (shown on the compare page, written in the refs manifest).
AUDIO_BANDWIDTH_DEFINITION = ("highest modulating frequency at which the chain's audio output is 3 dB below "
                              "its output at 1 kHz (AM test tones through the chain, AGC held)")

_WINDOW_S = 0.1        # analysis window: tones on a 10 Hz grid
_SETTLE_S = 0.15       # filters, detector (PLL) and audio high-pass settle first
_STEPS_PER_OCTAVE = 24
_LOWEST_HZ = 50.0


@dataclass(frozen=True)
class AudioResponse:
    """Overall audio response of a chain at one tuning.

    Attributes
    ----------
    freqs_hz : tuple of float
        Modulating frequencies of the test tones.
    response_db : tuple of float
        Audio output at each, dB re the output at :data:`REFERENCE_HZ`.
    bandwidth_hz : float or None
        Upper edge, :data:`AUDIO_BANDWIDTH_DEFINITION`; None when the response stays within 3 dB up to
        the highest test tone.
    low_edge_hz : float or None
        The same edge below 1 kHz (None when within 3 dB down to the lowest tone).
    path : str
        The receiver path measured.
    """

    freqs_hz: tuple
    response_db: tuple
    bandwidth_hz: Optional[float]
    low_edge_hz: Optional[float]
    path: str


def comb_frequencies(audio_rate_hz: float, window_s: float = _WINDOW_S) -> np.ndarray:
    """The test tones: 1/24 octave apart from 50 Hz to 40 % of the audio rate, on the window's grid.

    Examples
    --------
    >>> f = comb_frequencies(48000.0)
    >>> float(f[0]), 1000.0 in f, bool(f[-1] <= 19200.0), len(f)
    (50.0, True, True, 171)
    """
    step = 1.0 / window_s
    top = 0.4 * audio_rate_hz
    n = int(math.floor(_STEPS_PER_OCTAVE * math.log2(top / _LOWEST_HZ)))
    f = _LOWEST_HZ * 2.0 ** (np.arange(n + 1) / _STEPS_PER_OCTAVE)
    f = np.unique(np.round(np.append(f, REFERENCE_HZ) / step) * step)
    return f[(f >= _LOWEST_HZ) & (f <= top)]


def _edge(freqs, resp, below: bool):
    """First frequency from 1 kHz outwards where the response is 3 dB down.

    The crossing is bracketed on the tone grid and refined on a cubic spline through the response against
    log-frequency (the grid's 1/24 octave alone would leave the edge some 0.05 % off).
    """
    from scipy import interpolate, optimize

    i0 = int(np.argmin(np.abs(freqs - REFERENCE_HZ)))
    idx = range(i0 - 1, -1, -1) if below else range(i0 + 1, len(freqs))
    prev = i0
    for i in idx:
        if resp[i] <= -AUDIO_BANDWIDTH_DB:
            lf = np.log(freqs)
            spline = interpolate.CubicSpline(lf, np.asarray(resp) + AUDIO_BANDWIDTH_DB)
            a, b = sorted((lf[prev], lf[i]))
            if spline(a) * spline(b) > 0:   # no crossing of the spline inside the bracket: the grid point
                return float(freqs[i])
            return float(math.exp(optimize.brentq(lambda v: float(spline(v)), a, b, xtol=1e-12)))
        prev = i
    return None


def _comb_period(freqs, phases, depth, fs):
    """One window of Σ depth·cos(2π f_k t + φ_k), t = n/fs, by an inverse FFT (the tones are on its bins)."""
    n = int(round(_WINDOW_S * fs))
    spec = np.zeros(n // 2 + 1, complex)
    spec[np.round(freqs * _WINDOW_S).astype(int)] = depth * n / 2 * np.exp(1j * phases)
    return np.fft.irfft(spec, n)


def measure_audio_response(design, tune_hz: float, *, path: str = "fast", spacing_hz: float = 10e3,
                           amplitude: float = 0.1, depth_rms: float = 0.15,
                           hold_gain_db: float = 0.0) -> AudioResponse:
    """Run the test-tone comb through the chain and read its overall audio response.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    path : {"fast", "exact"}
    spacing_hz : float
        Channel spacing (only to validate the tuning as the reports do).
    amplitude : float
        Carrier amplitude, full scale 1 (0.1 = −20 dBFS).
    depth_rms : float
        RMS of the summed modulation (each of K tones has depth ``depth_rms·sqrt(2/K)``).
    hold_gain_db : float
        Gain at which the AGC is held.

    Returns
    -------
    AudioResponse

    Notes
    -----
    s(t) = A·(1 + Σ_k m·cos(2π f_k t + φ_k)), φ_k = −π·k²/K (Schroeder phases), sent at the tune; the audio
    output after :data:`_SETTLE_S` is read over one window of whole periods of every tone; the response at
    f_k is ``20·log10(|Y(f_k)|/|Y(1 kHz)|)``.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> r = measure_audio_response(design_chain("medium"), 1e6)
    >>> 2500 < r.bandwidth_hz < 4500, r.path
    (True, 'fast')
    """
    from ..run import Receiver
    from .selectivity import _ToneCapture, validate_tuning

    tune_hz, spacing_hz = validate_tuning(design, tune_hz, spacing_hz)
    afs = float(design.audio.rate_hz)
    info = _ToneCapture(max(240e3, 100e3 * math.ceil(2.5 * afs / 100e3)), tune_hz)
    freqs = comb_frequencies(afs)
    k = np.arange(freqs.size)
    phases = -math.pi * k * k / freqs.size
    m = depth_rms * math.sqrt(2.0 / freqs.size)
    n = int(round((_SETTLE_S + _WINDOW_S) * info.fs))
    # a bench measurement of the chain: noise-free, as the other test-tone figures (no front-end noise)
    rx = Receiver(design, info, tune_hz, path=path, agc_hold_gain_db=hold_gain_db, thermal_noise=False)
    env = 1.0 + _comb_period(freqs, phases, m, info.fs)
    env = np.tile(env, -(-n // env.size))[:n]     # every tone is periodic in the window
    carrier = np.exp(2j * math.pi * (tune_hz - info.center_hz) / info.fs * np.arange(n))
    x = (amplitude * env * carrier).astype(np.complex64)
    audio = np.concatenate([rx.process(x), rx.flush()])
    rx.close()
    first = int(round(_SETTLE_S * afs))
    win = audio[first:first + int(round(_WINDOW_S * afs))]
    spec = np.fft.rfft(win)
    bins = np.round(freqs * _WINDOW_S).astype(int)
    mag = np.abs(spec[bins])
    resp = db20(mag / mag[int(np.argmin(np.abs(freqs - REFERENCE_HZ)))])
    return AudioResponse(tuple(float(f) for f in freqs), tuple(float(v) for v in resp),
                         _edge(freqs, resp, below=False), _edge(freqs, resp, below=True), path)


def audio_bandwidth_hz(design, tune_hz: float, *, path: str = "fast", spacing_hz: float = 10e3):
    """The chain's audio bandwidth (:data:`AUDIO_BANDWIDTH_DEFINITION`), Hz, or None beyond the test tones.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> narrow, wide = (audio_bandwidth_hz(design_chain(p), 1e6) for p in ("narrow", "wide"))
    >>> narrow < 2500 < 5000 < wide
    True
    """
    return measure_audio_response(design, tune_hz, path=path, spacing_hz=spacing_hz).bandwidth_hz
