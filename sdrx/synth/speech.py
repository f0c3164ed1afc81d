"""Speech-like synthetic program: phrases of syllables with pauses.

Not speech, but it has what matters to a receiver test: a syllable-rate
envelope (about 4 per second), pauses between phrases, voiced sounds (a
glottal pulse train at a falling pitch, shaped by three formant resonances
of a vowel) and unvoiced sounds (hiss at 2–4.4 kHz), band-limited as
broadcast audio.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import signal

from .source import ProgramSource, broadcast_sos

__all__ = ["SpeechSource", "VOWEL_FORMANTS_HZ"]

# First three formants of five vowels, adult speaker, Hz (Peterson & Barney, J. Acoust. Soc. Am. 24, 1952,
# average male formants; from memory)
VOWEL_FORMANTS_HZ = (
    (730.0, 1090.0, 2440.0),  # a
    (530.0, 1840.0, 2480.0),  # e
    (270.0, 2290.0, 3010.0),  # i
    (570.0, 840.0, 2410.0),  # o
    (300.0, 870.0, 2240.0),  # u
)
FORMANT_BANDWIDTHS_HZ = (90.0, 110.0, 170.0)


def _resonator_sos(fs, freqs, bws):
    """Cascade of two-pole resonators, each with unity gain at 0 Hz."""
    rows = []
    for f, b in zip(freqs, bws):
        f = min(f, 0.45 * fs)
        r = math.exp(-math.pi * b / fs)
        c = 2.0 * r * math.cos(2.0 * math.pi * f / fs)
        g = 1.0 - c + r * r
        rows.append([g, 0.0, 0.0, 1.0, -c, r * r])
    return np.array(rows)


class SpeechSource(ProgramSource):
    """Raw (not yet normalised) speech-like program.

    Parameters
    ----------
    fs : float
        Sample rate, Hz.
    bandwidth : float
        Audio low-pass edge, Hz.
    pitch : float
        Mean voice pitch, Hz.
    syllable_rate : float
        Mean syllables per second.
    seed : int
        Seed of the event generator.

    Notes
    -----
    A phrase holds 3–8 syllables and ends in a pause of 0.25–0.7 s. A syllable
    lasts (0.6–1.4)/syllable_rate; 60 % begin with an unvoiced burst (20 %
    of the syllable). The vowel part is a pulse train whose pitch falls from
    1.15·pitch to 0.85·pitch over the phrase (declination) with a ±10 % accent
    per syllable, through the vowel's formant resonators, under a raised-sine
    envelope. Rendering is per syllable, queued, so reads of any size give
    the same samples. State: random generator, formant and fricative filter
    state, glottal phase, queue of rendered samples.

    Examples
    --------
    >>> x = SpeechSource(16000.0, 4500.0, 120.0, 4.0, seed=1).read(16000)
    >>> x.shape, bool(np.all(np.isfinite(x)))
    ((16000,), True)
    """

    def __init__(self, fs, bandwidth, pitch, syllable_rate, seed):
        super().__init__(fs)
        self._rng = np.random.default_rng(seed)
        self._pitch = pitch
        self._syl_s = 1.0 / syllable_rate
        self._post = broadcast_sos(fs, 80.0, bandwidth)
        self._post_zi = np.zeros((self._post.shape[0], 2))
        self._hiss = signal.butter(4, [2000.0, min(4400.0, 0.9 * bandwidth, 0.45 * fs)], btype="bandpass",
                                   output="sos", fs=fs)
        self._hiss_zi = np.zeros((self._hiss.shape[0], 2))
        self._formant_zi = np.zeros((3, 2))
        self._glottal_phase = 0.0
        self._pending = np.zeros(0)

    def _phrase(self) -> np.ndarray:
        rng, fs = self._rng, self.fs
        n_syl = int(rng.integers(3, 9))
        pieces = []
        for i in range(n_syl):
            dur = self._syl_s * rng.uniform(0.6, 1.4)
            n = max(16, int(round(dur * fs)))
            frac0, frac1 = i / n_syl, (i + 1) / n_syl
            accent = rng.uniform(0.9, 1.1)
            out = np.zeros(n)
            n_cons = int(0.2 * n) if rng.random() < 0.6 else 0
            if n_cons:
                hiss, self._hiss_zi = signal.sosfilt(self._hiss, rng.standard_normal(n_cons), zi=self._hiss_zi)
                env = np.sin(np.pi * np.arange(n_cons) / n_cons) ** 2
                out[:n_cons] = 0.35 * hiss * env
            nv = n - n_cons
            t = np.arange(nv) / nv
            decl = 1.15 - 0.3 * (frac0 + (frac1 - frac0) * t)
            f0 = self._pitch * accent * decl * (1.0 + 0.01 * rng.standard_normal())
            phase = self._glottal_phase + np.cumsum(f0 / fs)
            pulses = np.diff(np.floor(np.concatenate(([self._glottal_phase], phase)))).clip(0, 1)
            self._glottal_phase = float(phase[-1] % 1.0)
            excitation = pulses + 0.02 * rng.standard_normal(nv)
            vowel = VOWEL_FORMANTS_HZ[int(rng.integers(len(VOWEL_FORMANTS_HZ)))]
            sos = _resonator_sos(fs, vowel, FORMANT_BANDWIDTHS_HZ)
            voiced, self._formant_zi = signal.sosfilt(sos, excitation, zi=self._formant_zi)
            env = np.sin(np.pi * np.minimum(t / 0.25, 1.0) / 2.0) ** 2 * np.cos(
                np.pi / 2.0 * np.clip((t - 0.6) / 0.4, 0.0, 1.0)) ** 2
            out[n_cons:] += voiced * env * (0.7 + 0.3 * rng.random())
            pieces.append(out)
        pieces.append(np.zeros(int(round(rng.uniform(0.25, 0.7) * fs))))
        return np.concatenate(pieces)

    def _render(self, start, count):
        while self._pending.size < count:
            self._pending = np.concatenate((self._pending, self._phrase()))
        raw, self._pending = self._pending[:count], self._pending[count:]
        y, self._post_zi = signal.sosfilt(self._post, raw, zi=self._post_zi)
        return y
