"""Music-like synthetic program: a melody, a bass line and chords, notes with harmonics.

Each bar (four beats at ``tempo_bpm``) follows a I–V–vi–IV progression in a
major key chosen by the seed; the melody walks a pentatonic scale in notes
of ½, 1 or 2 beats (with rests), the bass plays the chord root on beats 1 and
3, a soft three-note chord holds for the bar. A note is a sum of harmonics
(amplitude 1/k, below the audio bandwidth) under an attack/decay/release
envelope.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from .source import ProgramSource, broadcast_sos

__all__ = ["MusicSource"]

_PENTATONIC = (0, 2, 4, 7, 9)  # semitones of the major pentatonic scale
_PROGRESSION = ((0, 4, 7), (7, 11, 14), (9, 12, 16), (5, 9, 12))  # I V vi IV, semitones above the key


class MusicSource(ProgramSource):
    """Raw (not yet normalised) music-like program.

    Parameters
    ----------
    fs : float
        Sample rate, Hz.
    bandwidth : float
        Audio low-pass edge, Hz; harmonics above it are not generated.
    tempo_bpm : float
        Beats per minute.
    seed : int
        Seed of the composer.

    Notes
    -----
    Note of fundamental f, duration d: x(t) = e(t) Σ_k k^-1 sin(2π k f t + φ_k),
    e(t) = min(t/10 ms, 1)·exp(−t/τ) for t < d, then a 60 ms cosine release;
    τ = 0.25–0.8 s. Equal temperament: f = 440·2^((n − 69)/12) (MIDI note n).
    Whole bars are composed ahead and overlap-added into a queue, so reads of
    any size give the same samples. State: random generator, bar counter,
    overlap-add buffer, low-pass state.

    Examples
    --------
    >>> x = MusicSource(16000.0, 4500.0, 100.0, seed=1).read(16000)
    >>> x.shape, bool(np.abs(x).max() > 0)
    ((16000,), True)
    """

    def __init__(self, fs, bandwidth, tempo_bpm, seed):
        super().__init__(fs)
        self._rng = np.random.default_rng(seed)
        self._bw = min(bandwidth, 0.45 * fs)
        self._beat = int(round(60.0 / tempo_bpm * fs))
        self._key = 57 + int(self._rng.integers(0, 7))  # A3 .. D#4 (MIDI)
        self._melody_note = self._key + 12
        self._bar = 0
        self._acc = np.zeros(0)  # overlap-add buffer starting at self._acc_start
        self._acc_start = 0
        self._post = broadcast_sos(fs, 60.0, bandwidth)
        self._post_zi = np.zeros((self._post.shape[0], 2))

    def _note(self, midi, dur, amp):
        fs, rng = self.fs, self._rng
        f = 440.0 * 2.0 ** ((midi - 69) / 12.0)
        n_on = max(1, int(round(dur * fs)))
        n_rel = int(round(0.06 * fs))
        t = np.arange(n_on + n_rel) / fs
        tau = rng.uniform(0.25, 0.8)
        env = np.minimum(t / 0.01, 1.0) * np.exp(-t / tau)
        env[n_on:] *= np.cos(0.5 * np.pi * np.arange(n_rel) / n_rel) ** 2
        x = np.zeros_like(t)
        k = 1
        while k * f < self._bw and k <= 12:
            x += np.sin(2.0 * np.pi * k * f * t + rng.uniform(0, 2 * np.pi)) / k
            k += 1
        return amp * env * x

    def _add(self, onset, wave):
        end = onset + wave.size
        need = end - self._acc_start
        if need > self._acc.size:
            self._acc = np.concatenate((self._acc, np.zeros(need - self._acc.size)))
        i = onset - self._acc_start
        self._acc[i:i + wave.size] += wave

    def _compose_bar(self):
        rng, beat = self._rng, self._beat
        start = self._bar * 4 * beat
        chord = _PROGRESSION[self._bar % 4]
        bar_s = 4 * beat / self.fs
        for semi in chord:
            self._add(start, self._note(self._key + semi, bar_s, 0.12))
        for b in (0, 2):
            self._add(start + b * beat, self._note(self._key - 12 + chord[0], 1.8 * beat / self.fs, 0.5))
        pos = 0.0
        while pos < 4.0:
            length = float(rng.choice([0.5, 1.0, 1.0, 2.0]))
            length = min(length, 4.0 - pos)
            if rng.random() > 0.1:
                step = int(rng.integers(-2, 3))
                degrees = [self._key + 12 + o * 12 + s for o in (-1, 0, 1) for s in _PENTATONIC]
                idx = min(range(len(degrees)), key=lambda j: abs(degrees[j] - self._melody_note))
                idx = int(np.clip(idx + step, 0, len(degrees) - 1))
                self._melody_note = degrees[idx]
                self._add(start + int(round(pos * beat)), self._note(self._melody_note, 0.9 * length * beat / self.fs, 0.6))
            pos += length
        self._bar += 1

    def _render(self, start, count):
        end = start + count
        while self._bar * 4 * self._beat < end:
            self._compose_bar()
        raw = np.zeros(count)
        avail = min(count, self._acc.size - (start - self._acc_start))
        if avail > 0:
            i = start - self._acc_start
            raw[:avail] = self._acc[i:i + avail]
        # drop what has been handed out
        drop = end - self._acc_start
        self._acc = self._acc[drop:] if drop < self._acc.size else np.zeros(0)
        self._acc_start = end
        y, self._post_zi = signal.sosfilt(self._post, raw, zi=self._post_zi)
        return y
