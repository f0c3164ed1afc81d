"""Heterodyne notch: second-order IIR notches on steady tones in the detected audio.

A carrier a few hundred hertz to a few kilohertz beside the wanted one beats
with it in the detector: a steady whistle at the difference frequency (and,
through an envelope detector, its harmonics). The notch sits after the
detector and ahead of the audio filters, and removes such tones while leaving
the programme as it is:

- ``frequencies``: fixed notches, from the first sample.
- ``auto``: a tracker finds the tones and follows them. Every hop of
  ``HOP_S`` it takes a Blackman-Harris-windowed spectrum of ``WINDOW_HOPS``
  hops (zero-padded to twice its length) and lists its peaks that stand
  ``threshold_db`` above the median spectrum within ``FLOOR_HZ`` of them,
  each frequency refined by quadratic interpolation of the log magnitude.
  Peaks of consecutive frames within ``LINK_HZ`` of each other form a track
  (the births, continuations and deaths of sinusoidal peak tracking); a
  track survives ``MISS_FRAMES`` frames without a peak, where loud programme
  masks the tone. A track is a steady tone when it has lasted ``steady_s``
  and its level has moved smoothly (median frame-to-frame change at most
  ``LEVEL_STEP_DB``): a carrier's beat holds its level or fades slowly,
  speech glides in pitch from syllable to syllable, and a musical note
  struck again and again at one pitch jumps up at each stroke and decays.
  A track at a harmonic of a steady tone is steady too (an envelope detector
  makes harmonics of a beat, and they fade more deeply than the beat). A
  steady tone is notched over its whole life, from the frame it was born in
  (and ``MISS_FRAMES`` either side): the stage looks ahead (its output lags
  its input by about ``steady_s`` plus the window; :meth:`HeterodyneNotch.flush`
  returns the rest at the end), so a whistle is removed from its first
  moment, not seconds later. The notch frequency follows a straight line
  fitted to the track's peaks within ``steady_s``/2, so a drifting tone is
  followed without lag.

Each notch is the second-order IIR notch of width ``width`` at −3 dB
(scipy.signal.iirnotch); the notches run in cascade. A notch that engages
part-way starts in the state it would have had if it had always been running
on the signal it meets (its filter run over the preceding samples); at the
start of the input that is the steady state for the first samples' mean and
the tone found there, so no stage starts with a transient. A tracked notch
is retuned only when its tone has moved by more than 1 % of the width (the
depth at that offset is still about 34 dB).

Notes
-----
Notch: H(z) = b·(1 − 2cos ω0·z⁻¹ + z⁻²) / (1 − 2b·cos ω0·z⁻¹ + (2b − 1)·z⁻²),
b = 1/(1 + tan(Δω/2)), Δω = 2π·width/fs (Orfanidis, *Introduction to Signal
Processing*, Prentice-Hall 1996, second-order notch and peak filters in the
IIR design chapter (from memory); scipy.signal.iirnotch implements it).
Window: Harris, "On the use of windows for harmonic analysis with the
discrete Fourier transform", Proc. IEEE 66(1), 1978 (4-term Blackman-Harris,
sidelobes 92 dB down: a strong whistle's skirts do not pass for tones).
Peak interpolation: Smith & Serra, "PARSHL: an analysis/synthesis program for
non-harmonic sounds based on a sinusoidal representation", ICMC 1987.
Peak tracking with births and deaths: McAulay & Quatieri, "Speech
analysis/synthesis based on a sinusoidal representation", IEEE Trans. ASSP
34(4), 1986.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.fft as sfft
from scipy import ndimage, signal

__all__ = ["HeterodyneNotch", "make_notch", "notch_sos", "HOP_S", "WINDOW_HOPS", "FLOOR_HZ", "LINK_HZ"]

HOP_S = 0.08        # tracker hop, s
WINDOW_HOPS = 4     # analysis window, hops (0.32 s: 3 Hz resolution)
FLOOR_HZ = 60.0     # the spectrum's floor: its median within this distance of a peak
LINK_HZ = 2.0       # a peak continues a track when within this distance of its last frequency
MISS_FRAMES = 4     # a track survives this many frames without a peak (a tone masked by loud programme)
LEVEL_STEP_DB = 0.8 # a steady tone's level moves by at most this much from frame to frame (median)
LEAD_TAUS = 12.0    # a notch that engages is run over this many time constants first (e^-12: 1e-5)


def notch_sos(f0_hz: float, width_hz: float, fs: float) -> np.ndarray:
    """One second-order notch at f0 of −3 dB width ``width_hz`` as an sos row.

    Examples
    --------
    >>> sos = notch_sos(1500.0, 40.0, 96000.0)
    >>> _, h = signal.sosfreqz(sos, worN=[1500.0, 1520.0, 100.0], fs=96000.0)
    >>> bool(abs(h[0]) < 1e-9), round(float(20 * np.log10(abs(h[1]))), 1), round(float(abs(h[2])), 3)
    (True, -3.0, 1.0)
    """
    b, a = signal.iirnotch(f0_hz, f0_hz / width_hz, fs=fs)
    return np.concatenate([b, a])[None, :]


@dataclass
class _Notch:
    """One notch in the cascade: its design, state and the last samples it was fed."""

    key: int
    f_hz: float
    sos: np.ndarray
    zi: np.ndarray
    hist: np.ndarray = field(default_factory=lambda: np.zeros(0))


@dataclass
class _Track:
    """A chain of spectral peaks, one per frame."""

    key: int
    frames: list                    # frames with a peak
    freqs: list                     # the peak's frequency in each
    levels: list                    # and its level, dB

    @property
    def first(self) -> int:
        return self.frames[0]

    @property
    def last(self) -> int:
        return self.frames[-1]

    @property
    def span(self) -> int:
        return self.last - self.first + 1


class HeterodyneNotch:
    """Streaming heterodyne notch on the detector output.

    Parameters
    ----------
    spec : NotchSpec
    fs : float
        Rate of the detected signal (the channel rate), Hz.
    band_hz : (float, float)
        Where the tracker looks for tones (the audio band).

    Attributes
    ----------
    tones : list of dict
        Auto mode: every tone notched, ``freq_hz`` (median over its life), ``start_s``, ``end_s``.

    Examples
    --------
    >>> from sdrx.chain.spec import NotchSpec
    >>> fs = 8000.0
    >>> t = np.arange(8000) / fs
    >>> x = 1.0 + 0.5 * np.cos(2 * np.pi * 1000 * t)       # a DC level and a whistle
    >>> nt = HeterodyneNotch(NotchSpec(frequencies_hz=(1000.0,)), fs, (100.0, 3000.0))
    >>> y = np.concatenate([nt.process(x[:777]), nt.process(x[777:]), nt.flush()])
    >>> round(float(np.max(np.abs(y - 1.0))), 6)           # no start-up transient, whistle gone
    0.0
    """

    def __init__(self, spec, fs: float, band_hz):
        self.spec = spec
        self.fs = float(fs)
        self.band_hz = (float(band_hz[0]), float(band_hz[1]))
        self.width = spec.width_hz
        tau = 1.0 / (math.pi * self.width)                       # time constant of the notch's poles
        self.lead = int(math.ceil(LEAD_TAUS * tau * self.fs))
        self.notches: list = []
        self._started = False
        self._buf = np.zeros(0)
        self._pend: list = []     # input not yet joined to _buf (cheap appends for small blocks)
        self._pend_n = 0
        self.tones: list = []
        self.auto = bool(spec.auto)
        if self.auto:
            self._init_tracker()

    # -- start-up ---------------------------------------------------------------------------
    def _fixed_notches(self) -> list:
        out = []
        for i, f in enumerate(self.spec.frequencies_hz):
            if f < self.fs / 2:
                out.append(_Notch(-1 - i, f, notch_sos(f, self.width, self.fs), np.zeros((1, 2))))
        return out

    def _prime(self, x0: np.ndarray) -> None:
        """Put every notch in the steady state of the input's start.

        The first samples x0 are fitted (least squares) with a constant and
        a tone at each notch's frequency; the cascade is then run over that
        model continued backwards for ``lead`` samples, so each notch starts
        as if the input had always been the level and the tones it starts with.
        """
        n = np.arange(len(x0))
        cols = [np.ones(len(x0))]
        for nt in self.notches:
            w = 2 * math.pi * nt.f_hz / self.fs
            cols += [np.cos(w * n), np.sin(w * n)]
        c, *_ = np.linalg.lstsq(np.column_stack(cols), x0, rcond=None)
        k = np.arange(-self.lead, 0)
        past = np.full(self.lead, c[0])
        for i, nt in enumerate(self.notches):
            w = 2 * math.pi * nt.f_hz / self.fs
            past += c[1 + 2 * i] * np.cos(w * k) + c[2 + 2 * i] * np.sin(w * k)
        for nt in self.notches:
            nt.zi = np.zeros((1, 2))
        self._run(past)

    def _run(self, x: np.ndarray) -> np.ndarray:
        """The cascade over x, keeping each notch's last ``lead`` input samples."""
        y = x
        if not len(y):
            return y
        for n in self.notches:
            if self.auto:   # the tracker's notches start up and retune on what they were fed
                n.hist = np.concatenate([n.hist, y])[-self.lead:]
            y, n.zi = signal.sosfilt(n.sos, y, zi=n.zi)
        return y

    # -- streaming --------------------------------------------------------------------------
    def process(self, x: np.ndarray) -> np.ndarray:
        """Feed detected samples; return the notched samples that are final so far."""
        x = np.asarray(x, dtype=float)
        if not len(x):
            return x
        if self._started and not self.auto:
            return self._run(x)
        self._pend_n += len(x)
        have = self._buf0 + len(self._buf) + self._pend_n if self.auto else self._pend_n
        need = self._frame_span(self._frame)[1] if self.auto else self.lead
        if have < need:
            self._pend.append(x.copy())   # held: the caller may reuse its array
            return np.zeros(0)
        self._pend.append(x)
        self._gather()
        if self.auto:
            return self._advance(final=False)
        return self._advance_fixed(final=False)

    def flush(self) -> np.ndarray:
        """End of input: the samples still held (the start-up fit, the tracker's look-ahead)."""
        self._gather()
        if not len(self._buf) and not self._started:
            return np.zeros(0)
        if self.auto:
            return self._advance(final=True)
        return self._advance_fixed(final=True)

    def _gather(self) -> None:
        if self._pend:
            self._buf = np.concatenate([self._buf] + self._pend)
            self._pend, self._pend_n = [], 0

    def _advance_fixed(self, final: bool) -> np.ndarray:
        if not self._started:
            if len(self._buf) < self.lead and not final:
                return np.zeros(0)
            self._started = True
            self.notches = self._fixed_notches()
            self._prime(self._buf[:self.lead])
        y = self._run(self._buf)
        self._buf = np.zeros(0)
        return y

    # -- the tracker ------------------------------------------------------------------------
    def _init_tracker(self) -> None:
        fs = self.fs
        self.hop = max(16, int(round(HOP_S * fs)))
        self.win = WINDOW_HOPS * self.hop
        self.nfft = sfft.next_fast_len(2 * self.win, real=True)
        self.window = signal.windows.blackmanharris(self.win, sym=False)
        self.df = fs / self.nfft
        lo, hi = self.band_hz
        self.k_lo = max(1, int(math.floor(lo / self.df)))
        self.k_hi = min(self.nfft // 2 - 2, int(math.ceil(hi / self.df)))
        self.floor_bins = 2 * int(round(FLOOR_HZ / self.df)) + 1
        self.lobe_bins = int(math.ceil(4 * self.nfft / self.win))   # the window's main lobe half width
        self.confirm = max(MISS_FRAMES + 1, int(math.ceil(self.spec.steady_s / HOP_S)))
        self._buf0 = 0                # absolute index of _buf[0]
        self._frame = 0               # next frame to analyse
        self._seg = 0                 # next hop segment to emit
        self._tracks: list = []       # tracks alive at the last analysed frame
        self._done: list = []         # ended tracks still within the look-ahead
        self._key = 0

    def _frame_span(self, j: int):
        """Absolute sample range of frame j's window (centred on hop segment j)."""
        c = j * self.hop + self.hop // 2
        return c - self.win // 2, c - self.win // 2 + self.win

    def _advance(self, final: bool) -> np.ndarray:
        end = self._buf0 + len(self._buf)
        # analyse every frame whose window is complete (all frames at the end)
        while True:
            a, b = self._frame_span(self._frame)
            if b > end and not (final and self._frame * self.hop < end):
                break
            self._analyse(self._frame, end)
            self._frame += 1
        if final:
            self._end_tracks(self._frame)
        outs = []
        # a segment is final once every track that covers it is known to be steady or not
        while True:
            s0 = self._seg * self.hop
            if s0 >= end:
                break
            if not final and self._seg + self.confirm + 2 * MISS_FRAMES > self._frame:
                break
            s1 = min(s0 + self.hop, end)
            outs.append(self._emit(self._seg, s0, s1))
            self._seg += 1
        # keep what later frames and notch start-ups still need
        keep_from = min(self._frame_span(self._frame)[0], self._seg * self.hop - self.lead)
        drop = max(0, keep_from - self._buf0)
        if drop:
            self._buf = self._buf[drop:]
            self._buf0 += drop
        return np.concatenate(outs) if outs else np.zeros(0)

    def _samples(self, a: int, b: int, end: int) -> np.ndarray:
        """Samples a..b−1; the parts before the start or past ``end`` at the mean of the rest."""
        lo, hi = max(a, 0, self._buf0), min(b, end)
        part = self._buf[lo - self._buf0:hi - self._buf0]
        out = np.full(b - a, float(np.mean(part)) if len(part) else 0.0)
        out[lo - a:hi - a] = part
        return out

    def _analyse(self, j: int, end: int) -> None:
        a, b = self._frame_span(j)
        x = self._samples(a, b, end)
        x = x - np.mean(x)
        X = sfft.rfft(x * self.window, self.nfft)
        found = self._peaks(X)
        peaks = [f for f, _ in found]
        levels = [v for _, v in found]
        alive = []
        used = set()
        for tr in self._tracks:
            best = None
            for i, f in enumerate(peaks):
                if i not in used and abs(f - tr.freqs[-1]) <= LINK_HZ and (
                        best is None or abs(f - tr.freqs[-1]) < abs(peaks[best] - tr.freqs[-1])):
                    best = i
            if best is not None:
                used.add(best)
                tr.frames.append(j)
                tr.freqs.append(peaks[best])
                tr.levels.append(levels[best])
            if j - tr.last > MISS_FRAMES:
                self._done.append(tr)
            else:
                alive.append(tr)
        for i, f in enumerate(peaks):
            if i not in used:
                alive.append(_Track(self._key, [j], [f], [levels[i]]))
                self._key += 1
        self._tracks = alive
        # forget ended tracks that no unemitted segment can need
        self._done = [t for t in self._done if t.last + MISS_FRAMES >= self._seg]

    def _end_tracks(self, frame: int) -> None:
        self._done.extend(self._tracks)
        self._tracks = []

    def _peaks(self, X: np.ndarray) -> list:
        """Frequencies of the peaks standing threshold_db above the local median (quadratic interpolation)."""
        lo, hi = self.k_lo, self.k_hi
        pad = self.floor_bins // 2 + self.lobe_bins
        a, b = max(1, lo - pad), min(len(X) - 1, hi + pad)
        Xb = X[a:b]
        db = 10.0 * np.log10(Xb.real ** 2 + Xb.imag ** 2 + 1e-300)
        floor = ndimage.median_filter(db, size=self.floor_bins, mode="nearest")
        idx, _ = signal.find_peaks(db - floor, height=self.spec.threshold_db, distance=2 * self.lobe_bins)
        idx = idx[(idx + a >= lo) & (idx + a <= hi) & (idx > 0) & (idx < len(db) - 1)]
        out = []
        for i in idx:
            k = i + a
            l, c, r = db[i - 1], db[i], db[i + 1]
            den = l - 2 * c + r
            d = 0.5 * (l - r) / den if den < 0 else 0.0
            out.append((float((k + d) * self.df), float(c - 0.25 * (l - r) * d)))
        return out

    # -- emitting a segment -----------------------------------------------------------------
    def _steady_tracks(self, seg: int) -> list:
        """Steady tracks covering frame ``seg``: the first ``max_tones`` in the order of their birth
        (a stable choice: a notch is not swapped for another while both tones last)."""
        long = [t for t in self._tracks + self._done
                if t.first - MISS_FRAMES <= seg <= t.last + MISS_FRAMES and t.span >= self.confirm]
        steady = [t for t in long if self._level_steady(t, seg)]
        # an envelope detector turns a beat into its harmonics too; they carry the fades of the
        # beat, squared and cubed, so a harmonic of a steady tone counts as steady by its frequency
        base = [float(np.median(t.freqs)) for t in steady]
        for t in long:
            if t not in steady and _is_harmonic(float(np.median(t.freqs)), base):
                steady.append(t)
        steady.sort(key=lambda t: t.key)
        return steady[:self.spec.max_tones]

    def _frequency_at(self, t: _Track, seg: int) -> float:
        """The track's frequency at frame ``seg``: a straight line fitted (least squares) to its peaks
        within ±steady_s/2, which follows a drifting tone without lag, also at the ends of the track."""
        k = np.array(t.frames, float)
        f = np.array(t.freqs)
        near = np.abs(k - seg) <= self.confirm // 2
        if near.sum() < 3:
            near = np.argsort(np.abs(k - seg))[:3]
        k, f = k[near], f[near]
        if len(k) < 3 or np.ptp(k) == 0:
            return float(np.median(f))
        slope, icpt = np.polyfit(k - seg, f, 1)
        return float(icpt)

    def _level_steady(self, t: _Track, seg: int) -> bool:
        """The track's level around frame ``seg`` moves smoothly: the median change between
        consecutive frames within ±steady_s is at most LEVEL_STEP_DB. A carrier's beat holds its level
        (or fades smoothly); a run of struck notes at one pitch jumps up at each note and decays."""
        lv = [v for k, v in zip(t.frames, t.levels) if abs(k - seg) <= self.confirm]
        if len(lv) < max(3, self.confirm // 2):
            return False
        return float(np.median(np.abs(np.diff(lv)))) <= LEVEL_STEP_DB

    def _emit(self, seg: int, s0: int, s1: int) -> np.ndarray:
        want = {}
        for t in self._steady_tracks(seg):
            want[t.key] = (t, self._frequency_at(t, seg))
        kept = []
        for n in self.notches:
            if n.key < 0 or n.key in want:
                kept.append(n)
        self.notches = kept
        if not self._started:
            self._started = True
            self.notches = self._fixed_notches()
        have = {n.key: n for n in self.notches}
        for key, (t, f) in want.items():
            n = have.get(key)
            if n is None:
                self._engage(t, f, s0)
                self.tones.append({"key": key, "freq_hz": f, "start_s": s0 / self.fs, "end_s": s1 / self.fs,
                                   "freqs": [f]})
            else:
                if abs(f - n.f_hz) > 0.01 * self.width:
                    self._retune(n, f)
            tone = next(x for x in self.tones if x["key"] == key)
            tone["end_s"] = s1 / self.fs
            tone["freqs"].append(f)
        if s0 == 0:
            # the start of the input: every notch in the steady state of the first samples
            self._prime(self._buf[:min(self.lead, len(self._buf))])
        x = self._buf[s0 - self._buf0:s1 - self._buf0]
        return self._run(x)

    def _engage(self, t: _Track, f: float, s0: int) -> None:
        """Append a notch at f that starts in the state it would have on the cascade's output so far."""
        sos = notch_sos(f, self.width, self.fs)
        n = _Notch(t.key, f, sos, np.zeros((1, 2)))
        if s0 > 0:
            n.hist = self._cascade_history()[-self.lead:].copy()
            _, n.zi = signal.sosfilt(sos, n.hist, zi=np.zeros((1, 2)))
        self.notches.append(n)

    def _cascade_history(self) -> np.ndarray:
        """The cascade's last ``lead`` output samples (what a notch appended at the end would have met)."""
        if not self.notches:
            return self._samples(self._seg * self.hop - self.lead, self._seg * self.hop, self._buf0 + len(self._buf))
        last = self.notches[-1]
        y, _ = signal.sosfilt(last.sos, last.hist, zi=np.zeros((1, 2)))
        return y

    def _retune(self, n: _Notch, f: float) -> None:
        n.f_hz = f
        n.sos = notch_sos(f, self.width, self.fs)
        _, n.zi = signal.sosfilt(n.sos, n.hist, zi=np.zeros((1, 2)))

    def report(self) -> list:
        """The tones notched (auto mode): frequency (median over the tone's life), start, end."""
        return [{"freq_hz": round(float(np.median(t["freqs"])), 2), "start_s": round(t["start_s"], 4),
                 "end_s": round(t["end_s"], 4)} for t in self.tones]


def _is_harmonic(f: float, bases: list, max_order: int = 6) -> bool:
    """f lies within k·LINK_HZ of the k-th harmonic (k = 2..max_order) of one of ``bases``."""
    for b in bases:
        k = int(round(f / b))
        if 2 <= k <= max_order and abs(f - k * b) <= k * LINK_HZ:
            return True
    return False


def make_notch(spec, fs: float, audio) -> HeterodyneNotch | None:
    """The notch stage for a NotchSpec at rate fs (None when it is off); the tracker looks for tones
    from the audio high-pass edge to 1.5 times the low-pass edge (a whistle just above the low-pass
    edge is still heard)."""
    if not spec.enabled:
        return None
    return HeterodyneNotch(spec, fs, (audio.highpass_hz, min(1.5 * audio.lowpass_hz, 0.45 * fs)))
