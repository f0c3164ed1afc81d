"""Figures that say how far a new output moved from its stored reference.

Every figure is computed by streaming both WAV files in fixed blocks, so memory
stays bounded whatever the length, and the same files always give the same
numbers.

Comparison figures (new output ``y`` against reference ``x``, sample by sample,
with no alignment: a change of delay is itself a change of output):

- SNR: ``10·log10(Σ x² / Σ (y − x)²)`` dB (``inf`` when identical).
- level change: ``20·log10(rms(y) / rms(x))`` dB.
- spectral difference: ``max_b |L_b(y) − L_b(x)|`` dB over the octave bands ``b``
  centred on 125, 250, 500, 1000, 2000 and 4000 Hz (edges fc/√2 … fc·√2; a band
  whose lower edge is at or above fs/2 is left out, one that straddles fs/2
  is cut at fs/2). ``L_b`` is the band's level from a Welch average (Hann
  window, segments of the power of two at or above fs/8 samples so bins are at
  most 8 Hz wide, half overlap), floored at −120 dBFS.

Output figures recorded in the manifest: RMS level in dBFS (a full-scale sine
is 0 dBFS, so ``20·log10(√2·rms)``), the occupied bandwidth (the frequency under
which 99 % of the output's power above 20 Hz lies: what the programme occupies,
not the chain's audio bandwidth, which :mod:`sdrx.analysis.audio_response`
measures), and the SINAD of a single-tone program when its frequency is known.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

import numpy as np

from ..errors import CaptureError
from ..capture.wavio import WavStream
from ..fileio import member_path

__all__ = [
    "OCTAVE_CENTRES_HZ",
    "BAND_FLOOR_DBFS",
    "BLOCK",
    "octave_bands",
    "SpectrumAccumulator",
    "AudioFigures",
    "audio_figures",
    "Comparison",
    "compare_audio",
    "snr_db",
    "tone_sinad_db",
    "write_difference",
    "plot_spectra",
]

OCTAVE_CENTRES_HZ = (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0)
BAND_FLOOR_DBFS = -120.0
BLOCK = 65536            # samples per read; fixed so that sums are always taken in the same order
_BANDWIDTH_FRACTION = 0.99
_BANDWIDTH_MIN_HZ = 20.0


def _open(path):
    import soundfile as sf

    try:
        return sf.SoundFile(str(path))
    except (RuntimeError, sf.LibsndfileError) as exc:
        raise CaptureError(f"{path}: not a readable WAV file ({exc})") from None


def _blocks(f, dtype="float64"):
    """Blocks of shape (n, channels) from an open SoundFile, from its start."""
    import soundfile as sf

    f.seek(0)
    while True:
        try:
            b = f.read(BLOCK, dtype=dtype, always_2d=True)
        except (RuntimeError, sf.LibsndfileError) as exc:
            raise CaptureError(f"{f.name}: cannot read samples ({exc})") from None
        if b.shape[0] == 0:
            return
        yield b


def octave_bands(fs: float) -> list:
    """Octave bands used for the spectral difference at audio rate ``fs``.

    Returns
    -------
    list of (centre_hz, low_hz, high_hz)

    Notes
    -----
    Octave band edges are fc/√2 and fc·√2 (ISO 266 preferred centres,
    IEC 61260 base-2 octaves). Bands whose low edge is at or above fs/2 are
    dropped; the high edge is cut at fs/2.

    Examples
    --------
    >>> [round(c) for c, lo, hi in octave_bands(8000.0)]
    [125, 250, 500, 1000, 2000, 4000]
    >>> round(octave_bands(8000.0)[-1][2])
    4000
    """
    out = []
    nyq = fs / 2.0
    for fc in OCTAVE_CENTRES_HZ:
        lo, hi = fc / math.sqrt(2.0), fc * math.sqrt(2.0)
        if lo >= nyq:
            continue
        out.append((fc, lo, min(hi, nyq)))
    return out


_PLOT_FLOOR_DB = -160.0   # lowest level a spectrum plot draws
_PLOT_RANGE_DB = 140.0    # a spectrum plot spans at most this under its highest level


def _segment_length(fs: float) -> int:
    return int(2 ** math.ceil(math.log2(max(fs / 8.0, 16.0))))


class SpectrumAccumulator:
    """Streaming Welch average of the power spectrum (all channels pooled).

    Parameters
    ----------
    fs : float
        Sample rate, Hz.

    Notes
    -----
    Each segment of N samples, Hann window w, gives one-sided bin powers
    ``P_k = c_k·|X_k|² / (N·Σw²)`` with c_k = 2 except at 0 and fs/2, so that
    ``Σ_k P_k`` estimates the mean square (Parseval; Welch 1967). Segments hop
    by N/2. A signal shorter than N gives one segment windowed over its own
    length and zero-padded to N.

    Examples
    --------
    >>> fs = 8000.0
    >>> acc = SpectrumAccumulator(fs)
    >>> acc.add(np.sin(2 * np.pi * 1000 * np.arange(8000) / fs)[:, None])
    >>> f, p = acc.result()
    >>> round(float(p.sum()), 2)   # mean square of a unit sine
    0.5
    """

    def __init__(self, fs: float):
        from scipy.signal import get_window

        self.fs = float(fs)
        self.n = _segment_length(self.fs)
        self.hop = self.n // 2
        self._w = get_window("hann", self.n)
        self._buf = None
        self._sum = np.zeros(self.n // 2 + 1)
        self._segments = 0

    def _segment(self, seg: np.ndarray, w: np.ndarray) -> np.ndarray:
        X = np.fft.rfft(seg * w[:, None], n=self.n, axis=0)
        p = (np.abs(X) ** 2).sum(axis=1) / (self.n * float(np.sum(w * w)) * seg.shape[1])
        p[1:] *= 2.0
        if self.n % 2 == 0:
            p[-1] /= 2.0
        return p

    def add(self, block: np.ndarray) -> None:
        """Add samples of shape (n, channels)."""
        b = np.asarray(block, dtype=float)
        if b.ndim == 1:
            b = b[:, None]
        self._buf = b if self._buf is None else np.concatenate([self._buf, b])
        while self._buf.shape[0] >= self.n:
            self._sum += self._segment(self._buf[: self.n], self._w)
            self._segments += 1
            self._buf = self._buf[self.hop:]

    def result(self):
        """Bin frequencies (Hz) and mean one-sided bin powers (full scale 1.0)."""
        from scipy.signal import get_window

        freqs = np.fft.rfftfreq(self.n, 1.0 / self.fs)
        if self._segments:
            return freqs, self._sum / self._segments
        if self._buf is None or self._buf.shape[0] < 2:
            return freqs, np.zeros_like(self._sum)
        L = self._buf.shape[0]
        return freqs, self._segment(self._buf, get_window("hann", L))

    def band_levels_dbfs(self) -> list:
        """Level of each octave band in dBFS (full-scale sine 0 dBFS), floored."""
        freqs, p = self.result()
        out = []
        for fc, lo, hi in octave_bands(self.fs):
            sel = (freqs >= lo) & (freqs < hi)
            power = float(p[sel].sum()) * 2.0      # mean square 0.5 -> 0 dBFS
            level = 10.0 * math.log10(power) if power > 0 else -math.inf
            out.append(max(level, BAND_FLOOR_DBFS))
        return out

    def occupied_bandwidth_hz(self) -> float:
        """Frequency under which 99 % of the power above 20 Hz lies (0 for silence)."""
        freqs, p = self.result()
        sel = freqs >= _BANDWIDTH_MIN_HZ
        f, q = freqs[sel], p[sel]
        total = float(q.sum())
        if total <= 0:
            return 0.0
        k = int(np.searchsorted(np.cumsum(q), _BANDWIDTH_FRACTION * total))
        return float(f[min(k, len(f) - 1)])


def _level_dbfs(sum_sq: float, count: int) -> float:
    if count == 0 or sum_sq <= 0:
        return -math.inf
    return 10.0 * math.log10(2.0 * sum_sq / count)


@dataclass(frozen=True)
class AudioFigures:
    """What a WAV file's audio looks like, for the manifest."""

    fs: float
    channels: int
    samples: int
    level_dbfs: float
    occupied_bandwidth_hz: float
    band_levels_dbfs: tuple

    def to_json(self) -> dict:
        """JSON-ready dict (``-inf`` written as null)."""
        return {
            "fs": self.fs,
            "channels": self.channels,
            "samples": self.samples,
            "level_dbfs": _finite_or_none(self.level_dbfs),
            "occupied_bandwidth_hz": self.occupied_bandwidth_hz,
            "octave_centres_hz": [b[0] for b in octave_bands(self.fs)],
            "band_levels_dbfs": [_finite_or_none(v) for v in self.band_levels_dbfs],
        }


def _finite_or_none(v):
    return None if v is None or not math.isfinite(v) else float(v)


def audio_figures(path) -> AudioFigures:
    """RMS level, occupied bandwidth and octave band levels of a WAV file.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    AudioFigures

    Raises
    ------
    CaptureError
        If the file cannot be read as audio.

    Notes
    -----
    Level: ``20·log10(√2·rms)`` dBFS, full-scale sine = 0 dBFS (AES17 convention).
    Occupied bandwidth: 99 % of the power above 20 Hz (the occupied-bandwidth
    idea of ITU-R SM.328 applied to a baseband signal).

    Examples
    --------
    >>> import tempfile, pathlib, soundfile as sf
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.wav"
    >>> fs = 8000
    >>> sf.write(p, 0.5 * np.sin(2 * np.pi * 1000 * np.arange(fs) / fs), fs, subtype="FLOAT")
    >>> fig = audio_figures(p)
    >>> round(fig.level_dbfs, 2), fig.samples
    (-6.02, 8000)
    """
    with _open(path) as f:
        fs = float(f.samplerate)
        acc = SpectrumAccumulator(fs)
        sum_sq, n = 0.0, 0
        for b in _blocks(f):
            sum_sq += float(np.sum(b * b))
            n += b.shape[0]
            acc.add(b)
        channels = f.channels
    return AudioFigures(fs=fs, channels=channels, samples=n,
                        level_dbfs=_level_dbfs(sum_sq / max(channels, 1), n),
                        occupied_bandwidth_hz=acc.occupied_bandwidth_hz(),
                        band_levels_dbfs=tuple(acc.band_levels_dbfs()))


def snr_db(ref: np.ndarray, new: np.ndarray) -> float:
    """SNR of ``new`` against ``ref``: ``10·log10(Σ ref² / Σ (new − ref)²)``.

    Examples
    --------
    >>> round(snr_db(np.array([1.0, -1.0]), np.array([1.1, -1.0])), 6)
    23.0103
    """
    ref = np.asarray(ref, dtype=float)
    err = float(np.sum((np.asarray(new, dtype=float) - ref) ** 2))
    sig = float(np.sum(ref ** 2))
    return _ratio_db(sig, err)


def _ratio_db(sig: float, err: float) -> float:
    if err == 0:
        return math.inf
    if sig == 0:
        return -math.inf
    return 10.0 * math.log10(sig / err)


@dataclass(frozen=True)
class Comparison:
    """Figures of a new output against its reference, and the verdict.

    ``passed`` is the verdict under ``tolerance``; ``problems`` lists what
    failed in words (empty when passed).
    """

    exact: bool
    identical: bool
    fs_ref: float
    fs_new: float
    samples_ref: int
    samples_new: int
    snr_db: float
    level_change_db: float
    spectrum_db: float
    band_centres_hz: tuple
    band_diff_db: tuple
    first_difference: Optional[int]
    passed: bool
    problems: tuple = field(default_factory=tuple)
    spectrum_ref: Optional[tuple] = None      # (freqs, powers) for the plot
    spectrum_new: Optional[tuple] = None
    spectrum_diff: Optional[tuple] = None     # of new - reference over the common length

    def to_json(self) -> dict:
        """JSON-ready figures (no spectra)."""
        return {
            "exact": self.exact,
            "identical": self.identical,
            "samples_ref": self.samples_ref,
            "samples_new": self.samples_new,
            "snr_db": _finite_or_none(self.snr_db),
            "level_change_db": _finite_or_none(self.level_change_db),
            "spectrum_db": _finite_or_none(self.spectrum_db),
            "band_centres_hz": list(self.band_centres_hz),
            "band_diff_db": [_finite_or_none(v) for v in self.band_diff_db],
            "first_difference": self.first_difference,
            "passed": self.passed,
            "problems": list(self.problems),
        }


def fmt_db(v: float, digits: int = 2, sign: bool = False) -> str:
    """A dB figure for one-line reports (``inf`` spelled out)."""
    if v is None:
        return "n/a"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    return f"{v:+.{digits}f}" if sign else f"{v:.{digits}f}"


def compare_audio(ref_path, new_path, tolerance) -> Comparison:
    """Compare a new WAV with its reference under a tolerance.

    Parameters
    ----------
    ref_path, new_path : str or Path
        Reference and new audio (WAV, float samples for an exact comparison).
    tolerance : sdrx.refs.cases.Tolerance

    Returns
    -------
    Comparison

    Raises
    ------
    CaptureError
        If either file cannot be read as audio.

    Notes
    -----
    SNR = 10·log10(Σ ref² / Σ (new − ref)²) over the common length, with no
    alignment; a different sample rate, channel count or length always
    fails. Level change = 20·log10(rms_new / rms_ref). Spectral difference =
    the largest octave-band level change (see module notes).

    Examples
    --------
    >>> import tempfile, pathlib, soundfile as sf
    >>> from sdrx.refs.cases import Tolerance
    >>> d = pathlib.Path(tempfile.mkdtemp()); fs = 8000
    >>> x = 0.5 * np.sin(2 * np.pi * 440 * np.arange(fs) / fs)
    >>> sf.write(d / "r.wav", x, fs, subtype="FLOAT"); sf.write(d / "n.wav", 1.01 * x, fs, subtype="FLOAT")
    >>> c = compare_audio(d / "r.wav", d / "n.wav", Tolerance())
    >>> round(c.snr_db, 1), round(c.level_change_db, 4), c.passed
    (40.0, 0.0864, False)
    """
    with _open(ref_path) as fr, _open(new_path) as fn:
        dtype = "float32" if tolerance.exact else "float64"
        walk = _PairWalk(fr, fn)
        walk.run(_blocks(fr, dtype), _blocks(fn, dtype))
    problems = walk.shape_problems()
    identical = not problems and walk.first_diff is None
    snr = _ratio_db(walk.s_rr, walk.s_ee) if walk.same_shape else -math.inf
    level = walk.level_change_db()
    fs_r, fs_n = walk.fs_r, walk.fs_n
    lr, ln = walk.acc_r.band_levels_dbfs(), walk.acc_n.band_levels_dbfs()
    centres = tuple(b[0] for b in octave_bands(fs_r))
    diffs = tuple(a - b for a, b in zip(ln, lr)) if fs_r == fs_n else ()
    spec = max((abs(v) for v in diffs), default=0.0) if fs_r == fs_n else math.inf
    problems += _tolerance_problems(tolerance, problems, identical, walk.first_diff, snr, level, spec)
    return Comparison(
        exact=tolerance.exact, identical=identical, fs_ref=fs_r, fs_new=fs_n,
        samples_ref=walk.n_r, samples_new=walk.n_n, snr_db=snr, level_change_db=level, spectrum_db=spec,
        band_centres_hz=centres, band_diff_db=diffs, first_difference=walk.first_diff,
        passed=not problems, problems=tuple(problems),
        spectrum_ref=walk.acc_r.result(), spectrum_new=walk.acc_n.result(),
        spectrum_diff=walk.acc_d.result() if walk.same_shape else None,
    )


class _PairWalk:
    """The sums and spectra of a reference and a new file walked block by block in step."""

    def __init__(self, fr, fn):
        self.fs_r, self.fs_n = float(fr.samplerate), float(fn.samplerate)
        self.ch_r, self.ch_n = fr.channels, fn.channels
        self.same_shape = self.fs_r == self.fs_n and self.ch_r == self.ch_n
        self.acc_r, self.acc_n = SpectrumAccumulator(self.fs_r), SpectrumAccumulator(self.fs_n)
        self.acc_d = SpectrumAccumulator(self.fs_r)
        self.s_rr = self.s_nn = self.s_ee = 0.0
        self.n_r = self.n_n = 0
        self.first_diff = None

    def run(self, gr, gn) -> None:
        """Walk both block iterators in step; blocks are the same size except at the ends."""
        br, bn = next(gr, None), next(gn, None)
        while br is not None or bn is not None:
            self._add(br, bn)
            br, bn = next(gr, None), next(gn, None)
        if self.first_diff is None and self.n_r != self.n_n:
            self.first_diff = min(self.n_r, self.n_n)

    def _add(self, br, bn) -> None:
        if br is not None:
            self.acc_r.add(br)
            self.s_rr += float(np.sum(br.astype(float) ** 2))
        if bn is not None:
            self.acc_n.add(bn)
            self.s_nn += float(np.sum(bn.astype(float) ** 2))
        if br is not None and bn is not None and self.same_shape:
            self._add_difference(br, bn)
        elif self.same_shape:
            tail = br if br is not None else bn
            self.s_ee += float(np.sum(tail.astype(float) ** 2))
        self.n_r += 0 if br is None else br.shape[0]
        self.n_n += 0 if bn is None else bn.shape[0]

    def _add_difference(self, br, bn) -> None:
        m = min(br.shape[0], bn.shape[0])
        d = bn[:m].astype(float) - br[:m].astype(float)
        self.s_ee += float(np.sum(d * d))
        self.acc_d.add(d)
        if self.first_diff is None:
            neq = np.nonzero(np.any(bn[:m] != br[:m], axis=1))[0]
            if neq.size:
                self.first_diff = self.n_r + int(neq[0])
        # the unmatched tail of the longer block counts in full as error
        self.s_ee += float(np.sum(br[m:].astype(float) ** 2)) + float(np.sum(bn[m:].astype(float) ** 2))

    def shape_problems(self) -> list:
        """A different rate, channel count or length: each always fails."""
        problems = []
        if self.fs_r != self.fs_n:
            problems.append(f"audio rate {self.fs_n:g} Hz, reference {self.fs_r:g} Hz")
        if self.ch_r != self.ch_n:
            problems.append(f"{self.ch_n} channels, reference {self.ch_r}")
        if self.n_r != self.n_n:
            problems.append(f"length {self.n_n} samples, reference {self.n_r}")
        return problems

    def level_change_db(self) -> float:
        """20·log10(rms_new / rms_ref); 0 for two silences, ±inf against a silence."""
        if self.s_rr == 0 and self.s_nn == 0:
            return 0.0
        if self.s_rr == 0 or self.s_nn == 0:
            return math.inf if self.s_nn > 0 else -math.inf
        return 10.0 * math.log10((self.s_nn / max(self.n_n, 1)) / (self.s_rr / max(self.n_r, 1)))


def _tolerance_problems(tolerance, shape_problems, identical, first_diff, snr, level, spec) -> list:
    """What the figures break of the tolerance: any sample for an exact case, else each limit."""
    problems = []
    if tolerance.exact:
        if not shape_problems and not identical:
            problems.append(f"samples differ from sample {first_diff}")
        return problems
    if snr < tolerance.snr_db:
        problems.append(f"SNR {fmt_db(snr, 1)} dB < {fmt_db(tolerance.snr_db, 1)} dB")
    if not abs(level) <= tolerance.level_db:
        problems.append(f"level change {fmt_db(level, 3, True)} dB exceeds {fmt_db(tolerance.level_db, 3)} dB")
    if not spec <= tolerance.spectrum_db:
        problems.append(f"spectral difference {fmt_db(spec, 2)} dB exceeds {fmt_db(tolerance.spectrum_db, 2)} dB")
    return problems


def tone_sinad_db(path, tone_hz: float, *, skip_s: Optional[float] = None) -> float:
    """SINAD of audio whose wanted content is one tone of known frequency.

    Parameters
    ----------
    path : str or Path
        WAV file.
    tone_hz : float
        Frequency of the tone, Hz.
    skip_s : float, optional
        Seconds skipped at the start (AGC and filters settling). Default: a
        tenth of the file, at most 0.25 s.

    Returns
    -------
    float
        SINAD in dB.

    Notes
    -----
    SINAD = (S + N + D) / (N + D) (IEEE Std 1241 / receiver measurement
    practice). The tone's amplitude and phase and the DC offset are found by
    least squares over the whole record (normal equations over the columns
    1, cos ωn, sin ωn accumulated block by block); N + D is the residual
    power, S + N + D the power with DC removed.

    Examples
    --------
    >>> import tempfile, pathlib, soundfile as sf
    >>> fs = 8000; n = np.arange(fs)
    >>> x = 0.5 * np.sin(2 * np.pi * 1000 * n / fs) + 0.005 * np.sin(2 * np.pi * 2000 * n / fs)
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "t.wav"; sf.write(p, x, fs, subtype="FLOAT")
    >>> round(tone_sinad_db(p, 1000.0, skip_s=0), 1)
    40.0
    """
    with _open(path) as f:
        fs = float(f.samplerate)
        total = f.frames
        if skip_s is None:
            skip_s = min(0.25, 0.1 * total / fs)
        skip = int(round(skip_s * fs))
        if skip >= total:
            skip = 0
        w = 2.0 * math.pi * float(tone_hz) / fs
        G = np.zeros((3, 3))
        b = np.zeros(3)
        s_xx = s_x = 0.0
        count = 0
        pos = 0
        for blk in _blocks(f):
            x = blk.mean(axis=1)
            idx = np.arange(pos, pos + x.size, dtype=float)
            pos += x.size
            keep = idx >= skip
            x, idx = x[keep], idx[keep]
            if x.size == 0:
                continue
            A = np.stack([np.ones_like(idx), np.cos(w * idx), np.sin(w * idx)], axis=1)
            G += A.T @ A
            b += A.T @ x
            s_xx += float(x @ x)
            s_x += float(x.sum())
            count += x.size
    if count < 3:
        return math.nan
    coef = np.linalg.lstsq(G, b, rcond=None)[0]
    residual = max(s_xx - float(coef @ b), 0.0)
    ac = s_xx - s_x * s_x / count
    return _ratio_db(ac, residual)


def write_difference(ref_path, new_path, out_path, outputs=None) -> Path:
    """Write ``new − ref`` as a float WAV (the shorter file padded with zeros).

    ``outputs``: an :class:`~sdrx.fileset.OutputSet` the file joins (default: a set of its own).

    Raises
    ------
    CaptureError
        If an input cannot be read, or the two differ in rate or channels.

    Examples
    --------
    >>> import tempfile, pathlib, soundfile as sf
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> sf.write(d / "r.wav", np.zeros(10), 8000, subtype="FLOAT")
    >>> sf.write(d / "n.wav", np.full(12, 0.25), 8000, subtype="FLOAT")
    >>> diff = write_difference(d / "r.wav", d / "n.wav", d / "d.wav")
    >>> sf.read(diff)[0].tolist() == [0.25] * 12
    True
    """

    out = Path(out_path)
    with _open(ref_path) as fr, _open(new_path) as fn:
        if fr.samplerate != fn.samplerate or fr.channels != fn.channels:
            raise CaptureError(f"{new_path}: rate/channels differ from {ref_path}; no difference file written")
        # sdrx's own WAV writer: libsndfile stamps float files with the time of writing (PEAK chunk)
        w = WavStream(out, fr.samplerate, fr.channels, "float32", outputs=outputs)
        try:
            gr, gn = _blocks(fr), _blocks(fn)
            while True:
                br, bn = next(gr, None), next(gn, None)
                if br is None and bn is None:
                    break
                m = max(0 if br is None else br.shape[0], 0 if bn is None else bn.shape[0])
                d = np.zeros((m, fr.channels))
                if bn is not None:
                    d[: bn.shape[0]] += bn
                if br is not None:
                    d[: br.shape[0]] -= br
                w.write_codes(d.astype("<f4").reshape(-1))
        except BaseException:
            w.abort()
            raise
        w.close()
    return out


def plot_spectra(comparison: Comparison, out_path, title: str, outputs=None) -> Path:
    """A PNG of the reference, new and difference spectra and, below, the octave-band changes.

    Parameters
    ----------
    comparison : Comparison
        From :func:`compare_audio`.
    out_path : str or Path
        PNG file, written atomically.
    title : str
        Plot title (the case name).
    outputs : OutputSet, optional
        The set the PNG joins (written into its temporary, renamed with the set).

    Returns
    -------
    Path

    Notes
    -----
    Levels are the power per bin of :class:`SpectrumAccumulator` in dBFS (a
    full-scale sine reads 0 dB); the bin width fs/N and the Hann window's
    noise bandwidth, 1.5 bins (Harris 1978, table 1), are stated on the axis.
    Levels more than 140 dB under the highest (and empty bins) are drawn on a
    marked floor.
    """
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    out = Path(out_path)
    fig = Figure(figsize=(9.0, 6.4), dpi=100)
    ax, bands = fig.subplots(2, 1, gridspec_kw={"height_ratios": [3, 1]})
    _plot_spectrum_curves(ax, comparison)
    _plot_band_changes(bands, comparison)
    fig.suptitle(title, fontsize=12)
    fig.tight_layout()
    with member_path(out, outputs) as tmp:
        fig.savefig(tmp, format="png", metadata={"Software": None})
    return out


def _spectrum_levels(comparison: Comparison) -> list:
    """(label, style, freqs, level dBFS) of each spectrum present, 0 Hz left out."""
    curves = []
    for spectrum, label, style in ((comparison.spectrum_ref, "reference", "-"),
                                   (comparison.spectrum_new, "new", "--"),
                                   (comparison.spectrum_diff, "new - reference", ":")):
        if spectrum is None:
            continue
        f, p = spectrum
        sel = f > 0
        with np.errstate(divide="ignore"):
            curves.append((label, style, f[sel], 10.0 * np.log10(p[sel] * 2.0)))
    return curves


def _plot_spectrum_curves(ax, comparison: Comparison) -> None:
    """The spectra on a log frequency axis with the unit, the bin width and a marked floor."""
    curves = _spectrum_levels(comparison)
    finite = [lv[np.isfinite(lv)] for *_, lv in curves]
    top = max((float(np.max(v)) for v in finite if v.size), default=0.0)
    top = 10.0 * math.ceil(top / 10.0)
    floor = max(_PLOT_FLOOR_DB, top - _PLOT_RANGE_DB)
    bin_hz = None
    for label, style, f, level in curves:
        ax.semilogx(f, np.maximum(np.nan_to_num(level, neginf=floor), floor), style, linewidth=1.2, label=label)
        bin_hz = float(f[1] - f[0]) if f.size > 1 else bin_hz
    ax.axhline(floor, color="0.4", linewidth=0.8)
    ax.text(0.99, floor, "floor of the plot: lower levels drawn on it", transform=ax.get_yaxis_transform(),
            ha="right", va="bottom", fontsize=9, color="0.3")
    ax.set_ylim(floor - 5.0, top + 5.0)
    unit = "" if bin_hz is None else f" per {bin_hz:.3g} Hz bin"
    ax.set_ylabel(f"power{unit}, dBFS\n(a full-scale sine reads 0 dB)", fontsize=10)
    if bin_hz is not None:
        ax.text(0.01, 0.98, f"resolution: {bin_hz:.3g} Hz bins, Hann window\n(noise bandwidth {1.5 * bin_hz:.3g} Hz)",
                transform=ax.transAxes, ha="left", va="top", fontsize=9, color="0.3")
    ax.set_xlabel("frequency, Hz", fontsize=10)
    ax.tick_params(labelsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=10, loc="upper right")


def _plot_band_changes(ax, comparison: Comparison) -> None:
    """The octave-band level change new - reference as labelled bars."""
    centres = list(comparison.band_centres_hz)
    diffs = [float(d) for d in comparison.band_diff_db]
    x = np.arange(len(centres))
    ax.bar(x, diffs, color="0.55")
    ax.axhline(0.0, color="0.2", linewidth=0.8)
    for i, d in zip(x, diffs):
        ax.annotate(f"{d:+.2f}", (i, d), ha="center", va="bottom" if d >= 0 else "top", fontsize=9)
    ax.set_xticks(x, [f"{c:g}" if c < 1000 else f"{c / 1e3:g}k" for c in centres])
    ax.set_xlabel("octave band centre, Hz", fontsize=10)
    ax.set_ylabel("change new - ref\ndB", fontsize=10)
    ax.tick_params(labelsize=9)
    lo = min([0.0] + diffs)
    hi = max([0.0] + diffs)
    pad = 0.25 * (hi - lo) or 1.0
    ax.set_ylim(lo - pad, hi + pad)
    ax.grid(True, axis="y", alpha=0.3)
