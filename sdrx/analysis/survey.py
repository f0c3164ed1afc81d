"""Carrier survey: which channels of the grid hold a carrier, and at what level.

A long-averaged power spectrum of the excerpt (Hann-windowed segments, averaged
over the whole excerpt, streamed in blocks) is searched around every channel of
the grid (multiples of the channel spacing inside the capture's band). A channel
holds a carrier when its strongest bin lies within a quarter of a spacing of the
channel, is the strongest bin of the whole channel (half a spacing either side)
and stands above the noise floor by the detection threshold. The carrier's own
frequency is interpolated between the bins (:func:`line_offset`), and
:func:`grid_fit` tells how many strong lines lie off the grid surveyed and
which of the two broadcast grids fits them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..errors import CaptureError, ParameterError
from ..limits import MAX_SPACING_HZ, MAX_SURVEY_BINS, MIN_SPACING_HZ, check_range
from ..units import format_frequency, parse_frequency

__all__ = ["Carrier", "Survey", "BandStatistics", "GridFit", "band_statistics", "survey", "survey_statistics",
           "survey_carriers", "noise_floor", "line_offset", "grid_fit", "DEFAULT_THRESHOLD_DB",
           "DEFAULT_SURVEY_SECONDS", "GRID_TOLERANCE_HZ"]

DEFAULT_THRESHOLD_DB = 10.0
#: ``sdrx info`` surveys at most this much of a capture unless --duration asks for more
DEFAULT_SURVEY_SECONDS = 60.0
_FALSE_ALARM = 1e-9      # per-bin probability that noise alone passes the threshold
_BINS_PER_CHANNEL = 64   # target resolution: spacing / 64
_MIN_BINS_PER_CHANNEL = 8
_MIN_SEGMENTS = 16
_LOBE = 2                # Hann main lobe half-width, bins
_DYNAMIC_RANGE_DB = 130.0  # floor never below strongest bin minus this (float32 arithmetic spurs)
_GUARD = 6               # a line's peak is the highest bin within this many bins either side
_SEGMENTS_PER_BLOCK = 16
_BLOCK_SAMPLES = 1 << 22
_RESOLUTION_SIGMAS = 3.0  # an offset's stated resolution: three standard errors of the interpolation
# least stated resolution, bins: speech-modulated carriers of the demo band (sdrx synth) read up to
# 3e-4 bins from their true offset with a noise-only bound ten times smaller; this floor is about 7x that error
_OFFSET_FLOOR_BINS = 2e-3
#: the broadcast channel grids: 9 kHz in ITU Regions 1 and 3 (Geneva 1975 LF/MF plan), 10 kHz in
#: Region 2 (Rio de Janeiro 1981 MF plan)
BROADCAST_SPACINGS_HZ = (9e3, 10e3)
#: a line within this of a channel lies on the grid: wider than a carrier's ±10 Hz tolerance plus a
#: ±100 ppm recorder clock across the MF band (170 Hz at 1.7 MHz), and well under the 1 kHz by which
#: any 9 kHz channel and any 10 kHz channel that are not the same frequency differ (both are whole kHz)
GRID_TOLERANCE_HZ = 300.0


@dataclass(frozen=True)
class Carrier:
    """A carrier found on the channel grid.

    Parameters
    ----------
    freq_hz : float
        The channel (a multiple of the spacing), Hz: the nearest channel of
        the grid, not the carrier's own frequency (that is :attr:`line_hz`).
    level_dbfs : float
        Carrier level, dBFS: 20·log10(A), A the carrier amplitude (peak of a
        real cosine; |x| of a complex exponential in I/Q).
    offset_hz : float
        Measured offset of the spectral line from the channel, Hz, interpolated
        between the bins (:func:`line_offset`).
    offset_resolution_hz : float
        What the offset is good to, Hz: three standard errors of the
        interpolation under the noise of the averaged spectrum (nan: not known).
    """

    freq_hz: float
    level_dbfs: float
    offset_hz: float = 0.0
    offset_resolution_hz: float = math.nan

    @property
    def line_hz(self) -> float:
        """The carrier's own frequency, Hz: the channel plus the measured offset."""
        return self.freq_hz + self.offset_hz

    def to_json(self) -> dict:
        res = self.offset_resolution_hz
        return {"freq_hz": float(self.freq_hz), "level_dbfs": round(float(self.level_dbfs), 2),
                "offset_hz": round_to_resolution(self.offset_hz, res) + 0.0,
                "line_hz": round_to_resolution(self.line_hz, res) + 0.0,
                "offset_resolution_hz": float(f"{res:.2g}") if math.isfinite(res) else None}


def resolution_decimals(resolution_hz: float) -> int:
    """Decimals of Hz that a value good to ``resolution_hz`` supports (negative: tens, hundreds)."""
    if not math.isfinite(resolution_hz) or resolution_hz <= 0:
        return 1
    return min(3, -math.floor(math.log10(resolution_hz)))


def round_to_resolution(value_hz: float, resolution_hz: float) -> float:
    """``value_hz`` rounded to the digits its resolution supports (0.1 Hz when not known).

    >>> round_to_resolution(2003.7, 14.6), round_to_resolution(2003.7, 0.4)
    (2000.0, 2003.7)
    """
    return float(round(float(value_hz), resolution_decimals(resolution_hz)))


@dataclass(frozen=True)
class Survey:
    """Result of :func:`survey`: carriers (strongest first) and how they were found."""

    carriers: tuple
    spacing_hz: float
    noise_floor_dbfs: float   # mean noise power per bin, as the level of a line of that power
    rbw_hz: float             # bin spacing fs / nfft
    nfft: int
    segments: int
    threshold_db: float       # detection threshold above the noise floor actually used

    def to_json(self) -> dict:
        return {
            "spacing_hz": float(self.spacing_hz),
            # an all-zero excerpt has no noise floor (-inf dBFS): null
            "noise_floor_dbfs": (round(float(self.noise_floor_dbfs), 2) if math.isfinite(self.noise_floor_dbfs)
                                 else None),
            "rbw_hz": float(self.rbw_hz),
            "nfft": int(self.nfft),
            "segments": int(self.segments),
            "threshold_db": round(float(self.threshold_db), 2),
            "carriers": [c.to_json() for c in self.carriers],
        }


def _choose_nfft(fs: float, spacing_hz: float, count: int) -> int:
    nfft = 1 << max(4, math.ceil(math.log2(fs * _BINS_PER_CHANNEL / spacing_hz)))
    floor = 1 << max(4, math.ceil(math.log2(fs * _MIN_BINS_PER_CHANNEL / spacing_hz)))
    while nfft > floor and count // nfft < _MIN_SEGMENTS:
        nfft //= 2
    return nfft


@dataclass(frozen=True)
class BandStatistics:
    """Averaged spectral statistics of a capture excerpt, from one streamed pass.

    Every array is indexed by ``freqs`` (absolute RF frequency, ascending;
    I/Q spectra are fft-shifted). Calibration as in :func:`survey`: a line of
    amplitude A summed over its main lobe gives A² in ``power``.

    Attributes
    ----------
    kind : str
        ``"iq"`` or ``"real"``.
    fs, center_hz : float
        Sample rate; centre of an I/Q capture (None for real).
    nfft, segments : int
        Segment length (Hann, no overlap) and how many were averaged.
    first, samples : int
        First sample of the excerpt and the number of samples used (whole segments).
    freqs : ndarray
    power : ndarray
        Mean |X_s|² per bin.
    mean : ndarray (complex)
        Mean X_s per bin (the part that repeats from segment to segment: a DC
        offset, lines at a whole number of cycles per segment).
    lag1 : ndarray (complex)
        Mean X_{s+1}·conj(X_s) per bin: a line δ bins off the bin centre turns
        by 2π·δ from one segment to the next.
    complementary : ndarray (complex) or None
        I/Q only: mean X_s(f)·X_s(−f), bin f paired with its mirror −f about
        the centre (the complementary spectrum; zero for a proper signal).
    dc : complex or float
        Time-domain mean of the samples used.
    """

    kind: str
    fs: float
    center_hz: float | None
    nfft: int
    segments: int
    first: int
    samples: int
    freqs: np.ndarray
    power: np.ndarray
    mean: np.ndarray
    lag1: np.ndarray
    complementary: np.ndarray | None
    dc: complex

    @property
    def rbw_hz(self) -> float:
        """Bin spacing fs / nfft, Hz."""
        return self.fs / self.nfft

    @property
    def seconds(self) -> float:
        """Duration of the samples used, s."""
        return self.samples / self.fs


def _check_spacing(info, spacing_hz) -> float:
    spacing = parse_frequency(spacing_hz, "--spacing")
    if spacing <= 0:
        raise ParameterError(f"--spacing: must be positive, got {spacing_hz!r}")
    check_range(spacing, "--spacing", MIN_SPACING_HZ, MAX_SPACING_HZ, unit="Hz")
    if spacing >= info.fs / 2:
        raise ParameterError(
            f"--spacing {format_frequency(spacing)}: must be well below the capture's bandwidth "
            f"(rate {format_frequency(info.fs)})"
        )
    return spacing


def band_statistics(reader, *, spacing_hz=10e3, start_s=0.0, duration_s=None, progress=None) -> BandStatistics:
    """Stream a capture excerpt once and average its spectral statistics.

    Parameters
    ----------
    reader : CaptureReader
    spacing_hz : float or str
        Channel spacing; sets the resolution (about spacing / 64).
    start_s, duration_s
        The excerpt, seconds.
    progress : callable, optional
        ``progress(done_samples, total_samples)``.

    Returns
    -------
    BandStatistics

    Raises
    ------
    ParameterError
        Spacing not positive, or not below the capture's bandwidth.
    CaptureError
        Excerpt too short to resolve the channel grid.

    Notes
    -----
    Hann-windowed segments of ``nfft`` samples, no overlap (Welch, 1967);
    memory is a few spectra of ``nfft`` bins whatever the length.
    """
    info = reader.info
    spacing = _check_spacing(info, spacing_hz)
    first, count = reader.sample_range(start_s, duration_s)
    nfft = _survey_nfft(info, spacing, count)
    acc = _SpectralSums(nfft, info.kind == "iq")
    used = (count // nfft) * nfft
    done = 0
    per_block = max(1, min(_SEGMENTS_PER_BLOCK, _BLOCK_SAMPLES // nfft))   # blocks of at most 4 Mi samples
    for block in reader.blocks(nfft * per_block, start_s=start_s, duration_s=duration_s):
        take = max(0, min(block.shape[0], used - done))
        if take // nfft > 0:
            acc.add(block[: (take // nfft) * nfft])
        done += block.shape[0]
        if progress is not None:
            progress(min(done, count), count)
        # the rest of the excerpt (less than a segment is unused) is still read, so that a reader
        # that checks the file's hash on a whole read (SigMF core:sha512) sees every byte
    return acc.statistics(info, first, used)


def _survey_nfft(info, spacing: float, count: int) -> int:
    """The segment length for the spacing, checked against the limit and the excerpt's length."""
    nfft = _choose_nfft(info.fs, spacing, count)
    if nfft > MAX_SURVEY_BINS:
        raise ParameterError(
            f"--spacing {format_frequency(spacing)}: resolving {format_frequency(spacing)} channels at the capture rate "
            f"{format_frequency(info.fs)} needs a "
            f"{nfft}-point spectrum; at most {MAX_SURVEY_BINS} (use a wider spacing)")
    if count < nfft:
        raise CaptureError(
            f"{info.path}: excerpt of {count} samples is too short to survey {format_frequency(spacing)} channels "
            f"(needs at least {nfft})"
        )
    return nfft


class _SpectralSums:
    """Running sums over Hann segments of ``nfft`` samples: power, mean, lag-one and complementary spectra."""

    def __init__(self, nfft: int, is_iq: bool):
        self.nfft, self.is_iq = nfft, is_iq
        self.window = np.hanning(nfft + 1)[:-1].astype(np.float32)  # periodic Hann
        nbin = nfft if is_iq else nfft // 2 + 1
        self.power = np.zeros(nbin, dtype=np.float64)
        self.mean = np.zeros(nbin, dtype=np.complex128)
        self.lag = np.zeros(nbin, dtype=np.complex128)
        self.comp = np.zeros(nbin, dtype=np.complex128) if is_iq else None
        self.mirror = (-np.arange(nfft)) % nfft
        self.total = 0.0 + 0.0j
        self.prev = None
        self.segments = 0

    def add(self, part) -> None:
        """Add whole segments (``part`` holds a multiple of ``nfft`` samples)."""
        k = part.shape[0] // self.nfft
        self.total += complex(np.sum(part, dtype=np.complex128 if self.is_iq else np.float64))
        seg = part.reshape(k, self.nfft) * self.window
        spec = np.fft.fft(seg, axis=1) if self.is_iq else np.fft.rfft(seg, axis=1)
        self.power += np.sum(spec.real.astype(np.float64) ** 2 + spec.imag.astype(np.float64) ** 2, axis=0)
        self.mean += np.sum(spec, axis=0, dtype=np.complex128)
        chain = spec if self.prev is None else np.concatenate([self.prev[None, :], spec])
        self.lag += np.sum(chain[1:] * np.conj(chain[:-1]), axis=0, dtype=np.complex128)
        self.prev = spec[-1]
        if self.comp is not None:
            self.comp += np.sum(spec * spec[:, self.mirror], axis=0, dtype=np.complex128)
        self.segments += k

    def statistics(self, info, first: int, used: int) -> BandStatistics:
        """The averages, calibrated (see :func:`survey`, Notes) and in ascending frequency."""
        nfft, is_iq, segments = self.nfft, self.is_iq, self.segments
        norm = (1.0 if is_iq else 4.0) / (nfft * float(np.sum(self.window.astype(np.float64) ** 2)))
        scale = norm / segments

        def arrange(a):
            return np.fft.fftshift(a) if is_iq else a

        if is_iq:
            freqs = info.center_hz + (np.arange(nfft) - nfft // 2) * (info.fs / nfft)
        else:
            freqs = np.arange(self.power.size) * (info.fs / nfft)
        dc = self.total / used
        return BandStatistics(
            kind=info.kind, fs=float(info.fs), center_hz=info.center_hz, nfft=nfft, segments=segments,
            first=first, samples=used, freqs=freqs, power=arrange(self.power * scale),
            mean=arrange(self.mean * (math.sqrt(norm) / segments)),
            lag1=arrange(self.lag * (norm / max(1, segments - 1))),
            complementary=None if self.comp is None else arrange(self.comp * scale),
            dc=dc if is_iq else dc.real,
        )


def survey(reader, *, spacing_hz=10e3, start_s=0.0, duration_s=None, threshold_db=DEFAULT_THRESHOLD_DB,
           progress=None) -> Survey:
    """Find the carriers on the channel grid of a capture excerpt.

    Parameters
    ----------
    reader : CaptureReader
        From :func:`sdrx.capture.open_capture`.
    spacing_hz : float or str
        Channel spacing: channels lie at whole multiples of it (9k in ITU
        Regions 1 and 3, 10k in Region 2).
    start_s, duration_s
        The excerpt, seconds.
    threshold_db : float
        Least height of a carrier's bin above the mean noise power per bin.
        The threshold used is the larger of this and the height that noise
        alone exceeds with probability 1e-9 per bin for the number of
        segments averaged (so short excerpts do not show phantom carriers).
    progress : callable, optional
        ``progress(done_samples, total_samples)``.

    Returns
    -------
    Survey
        ``carriers`` strongest first.

    Raises
    ------
    ParameterError
        Spacing not positive, or not below the capture's bandwidth.
    CaptureError
        Excerpt too short to resolve the channel grid.

    Notes
    -----
    Spectrum: Welch-style average of |FFT(w·x)|² over non-overlapping Hann
    segments of ``nfft`` samples (resolution about spacing/64), scaled by
    1/(nfft·Σw²) so that a line of amplitude A summed over its main lobe gives
    A² (I/Q; real signals are scaled by 4 to count the cosine's two halves).
    Level: A² = Σ_{k=-2..2} P[k₀+k] − 5·N, the main-lobe power (Parseval,
    free of the window's scalloping) less the noise N in those bins.
    Noise floor: median of the spectrum divided by the median of the
    gamma(K, 1/K) law that an average of K noise periodograms follows
    (robust: most bins hold only noise), but never more than 130 dB below
    the strongest bin, so that the arithmetic spurs of a noiseless synthetic
    capture are not taken for carriers. Source: P. D. Welch, "The use of
    the fast Fourier transform for the estimation of power spectra", IEEE
    Trans. Audio Electroacoust. 15 (1967); F. J. Harris, "On the use of
    windows for harmonic analysis with the DFT", Proc. IEEE 66 (1978).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from sdrx.capture import open_writer, open_capture
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "s.sigmf-meta"
    >>> fs, n = 200e3, 200_000
    >>> t = np.arange(n) / fs
    >>> x = 0.1 * np.exp(2j * np.pi * 30e3 * t) + 1e-3 * np.random.default_rng(0).standard_normal(n)
    >>> with open_writer(p, fs=fs, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
    ...     _ = w.write(x.astype(np.complex64))
    >>> [(c.freq_hz, round(c.level_dbfs, 1)) for c in survey_carriers(open_capture(p))]
    [(1030000.0, -20.0)]
    """
    spacing = _check_spacing(reader.info, spacing_hz)
    thr_db = _check_threshold(threshold_db)
    stats = band_statistics(reader, spacing_hz=spacing, start_s=start_s, duration_s=duration_s,
                            progress=progress)
    return survey_statistics(stats, spacing, thr_db)


def _check_threshold(threshold_db) -> float:
    thr_db = float(threshold_db)
    if not math.isfinite(thr_db) or thr_db <= 0:
        raise ParameterError(f"threshold_db: must be a positive number of dB, got {threshold_db!r}")
    return thr_db


def noise_floor(band: BandStatistics) -> float:
    """Mean noise power per bin of the averaged spectrum (see :func:`survey`, Notes)."""
    gamma = stats_gamma(band.segments)
    noise = float(np.median(band.power)) / float(gamma.median())
    return max(noise, float(np.max(band.power)) * 10.0 ** (-_DYNAMIC_RANGE_DB / 10.0))


def stats_gamma(segments: int):
    """The gamma(K, 1/K) law of an average of K noise periodogram values (mean 1)."""
    return stats.gamma(segments, scale=1.0 / segments)


def survey_statistics(band: BandStatistics, spacing_hz: float, threshold_db: float = DEFAULT_THRESHOLD_DB) -> Survey:
    """The carriers on the channel grid, from statistics already averaged (see :func:`survey`)."""
    thr_db = _check_threshold(threshold_db)
    noise = noise_floor(band)
    thr_used = max(thr_db, 10.0 * math.log10(float(stats_gamma(band.segments).isf(_FALSE_ALARM))))
    carriers = _find(band.power, band.freqs, band.rbw_hz, spacing_hz, noise, 10.0 ** (thr_used / 10.0),
                     band.segments)
    floor_db = 10.0 * math.log10(noise) if noise > 0 else -math.inf
    return Survey(carriers=tuple(carriers), spacing_hz=float(spacing_hz), noise_floor_dbfs=floor_db,
                  rbw_hz=band.rbw_hz, nfft=band.nfft, segments=band.segments, threshold_db=thr_used)


def _find(power, freqs, rbw, spacing, noise, thr_ratio, segments) -> list:
    n = power.size
    f0 = freqs[0]
    tol = spacing / 4.0
    lo_ch = math.ceil((freqs[0] + tol) / spacing)
    hi_ch = math.floor((freqs[-1] - tol) / spacing)
    out = []
    for ch in range(max(lo_ch, 1), hi_ch + 1):
        fc = ch * spacing
        a = max(_LOBE, int(math.ceil((fc - tol - f0) / rbw)))
        b = min(n - 1 - _LOBE, int(math.floor((fc + tol - f0) / rbw)))
        if b <= a:
            continue
        k = a + int(np.argmax(power[a : b + 1]))
        # a line's peak is a local maximum inside the window and over +-_GUARD bins, not the
        # skirt (window sidelobes, sidebands) of a stronger neighbour rising towards one edge
        if k in (a, b) or power[k] < thr_ratio * noise:
            continue
        if power[k] < np.max(power[max(0, k - _GUARD): k + _GUARD + 1]):
            continue
        # a carrier is the strongest line of its whole channel (half a spacing either side); a
        # weaker line there is a sideband of a carrier that sits off this grid (a 10 kHz band
        # surveyed on a 9 kHz grid), not a carrier of its own. Carriers of neighbouring channels
        # lie at least 3/4 of a spacing away, outside this span.
        c_lo = max(0, int(math.ceil((fc - spacing / 2.0 - f0) / rbw)))
        c_hi = min(n - 1, int(math.floor((fc + spacing / 2.0 - f0) / rbw)))
        if power[k] < np.max(power[c_lo : c_hi + 1]):
            continue
        lobe = power[k - _LOBE : k + _LOBE + 1]
        line = float(np.sum(lobe)) - lobe.size * noise
        if line <= 0:
            continue
        delta, sigma = line_offset(power, k, noise, segments)
        out.append(Carrier(freq_hz=float(fc), level_dbfs=10.0 * math.log10(line),
                           offset_hz=float(freqs[k] + delta * rbw - fc),
                           offset_resolution_hz=_RESOLUTION_SIGMAS * sigma * rbw))
    out.sort(key=lambda c: (-c.level_dbfs, c.freq_hz))
    return out


def line_offset(power, k: int, noise: float, segments: int) -> tuple:
    """A line's offset from bin ``k`` and its standard error, both in bins.

    Parameters
    ----------
    power : ndarray
        Averaged Hann-windowed power spectrum (:class:`BandStatistics`).
    k : int
        The line's strongest bin (not at either end of ``power``).
    noise : float
        Mean noise power per bin.
    segments : int
        Number of periodograms averaged.

    Returns
    -------
    (delta, sigma) : tuple of float
        Offset δ in bins (−0.5 to 0.5 for a steady line) and its standard error.

    Notes
    -----
    Interpolation for the Hann window from the strongest bin and its larger
    neighbour, α = |X[k±1]|/|X[k]|: δ = ±(2α − 1)/(α + 1), exact for a steady
    line (T. Grandke, "Interpolation algorithms for discrete Fourier transforms
    of weighted signals", IEEE Trans. Instrum. Meas. IM-32 (1983) 350–355).
    The magnitudes are taken from the averaged power less the noise. Standard
    error: first-order propagation of the variance of an average of K
    periodogram values of a line of power S in circular noise of power N,
    (2·S·N + N²)/K (the noise of the two bins taken as uncorrelated), plus,
    for the neighbour, the square of the power that the far neighbour holds
    beyond what the window puts there at this offset (what is not the steady
    line: programme sidebands close to the carrier). A consistency bound,
    not a proof: sidebands placed symmetrically about the line bias the two
    neighbours alike, so the stated resolution is never below 0.002 bins.
    """
    side = 1 if power[k + 1] >= power[k - 1] else -1
    q0 = float(power[k]) - noise
    if not q0 > 0:
        return 0.0, math.nan        # no line above the noise: no offset to tell
    q1 = max(float(power[k + side]) - noise, q0 * 1e-12)
    a = math.sqrt(q1 / q0)
    delta = side * (2.0 * a - 1.0) / (a + 1.0)
    var0 = (2.0 * q0 * noise + noise * noise) / segments
    var1 = (2.0 * q1 * noise + noise * noise) / segments
    # power in the bins that is not the steady line (programme sidebands close to the carrier): the far
    # neighbour's departure from the power the Hann kernel puts there at this offset, |W(1+|δ|)/W(|δ|)|² =
    # ((1 - |δ|)/(2 + |δ|))² (the same kernel ratio as α), taken as an error of the near neighbour too
    d = min(abs(delta), 0.5)
    q2 = q0 * ((1.0 - d) / (2.0 + d)) ** 2
    far = float(power[k - side]) - noise - q2
    var1 += max(0.0, far * far - (2.0 * q2 * noise + noise * noise) / segments)   # beyond the noise's share
    sigma = 3.0 / (a + 1.0) ** 2 * (a / 2.0) * math.sqrt(var0 / q0 ** 2 + var1 / q1 ** 2)
    return delta, max(sigma, _OFFSET_FLOOR_BINS / _RESOLUTION_SIGMAS)


@dataclass(frozen=True)
class GridFit:
    """How the strong lines of a spectrum fit the grid surveyed and the broadcast grids.

    Attributes
    ----------
    spacing_hz : float
        The grid surveyed.
    lines_hz : tuple of float
        The strong lines found without a grid (each the strongest within half a
        spacing, above the survey's threshold), ascending.
    off_grid : int
        How many lie more than :data:`GRID_TOLERANCE_HZ` from a channel of the grid surveyed.
    fits : dict
        For each broadcast spacing (9 and 10 kHz), how many lines lie on its grid.
    """

    spacing_hz: float
    lines_hz: tuple
    off_grid: int
    fits: dict

    @property
    def suggested_spacing_hz(self) -> float | None:
        """The broadcast spacing that fits more lines than the grid surveyed, or None."""
        here = len(self.lines_hz) - self.off_grid
        best = max(self.fits, key=lambda s: (self.fits[s], s == self.spacing_hz))
        return best if self.fits[best] > here else None

    def hint(self) -> str | None:
        """One line for the terminal when strong lines lie off the grid surveyed, else None."""
        if self.off_grid == 0:
            return None
        n = len(self.lines_hz)
        text = (f"{self.off_grid} of {n} strong lines lie off the {self.spacing_hz / 1e3:g} kHz grid "
                f"(more than {GRID_TOLERANCE_HZ:g} Hz from a channel)")
        best = self.suggested_spacing_hz
        if best is not None:
            text += f"; a {best / 1e3:g} kHz grid fits {self.fits[best]} of {n}: --spacing {best / 1e3:g}k"
        return text

    def to_json(self) -> dict:
        return {"lines": len(self.lines_hz), "off_grid": int(self.off_grid), "tolerance_hz": GRID_TOLERANCE_HZ,
                "fits": {f"{s:.0f}": int(v) for s, v in self.fits.items()},
                "suggested_spacing_hz": self.suggested_spacing_hz}


def _on_grid(freqs_hz, spacing_hz: float):
    """True where a frequency lies within :data:`GRID_TOLERANCE_HZ` of a multiple of the spacing."""
    f = np.asarray(freqs_hz, dtype=float)
    return np.abs(f - np.round(f / spacing_hz) * spacing_hz) <= GRID_TOLERANCE_HZ


def _strong_lines(band: BandStatistics, found: Survey) -> np.ndarray:
    """The lines above the survey's threshold that are each the strongest within half a spacing."""
    power, rbw = band.power, band.rbw_hz
    noise = noise_floor(band)
    half = max(_GUARD, int(found.spacing_hz / 2.0 / rbw))
    peak = np.lib.stride_tricks.sliding_window_view(np.pad(power, half, constant_values=-np.inf), 2 * half + 1)
    strongest = power >= np.max(peak, axis=1)
    idx = np.flatnonzero(strongest & (power >= noise * 10.0 ** (found.threshold_db / 10.0)) & (power > noise))
    idx = idx[(idx >= 1) & (idx <= power.size - 2)]
    deltas = [line_offset(power, int(k), noise, band.segments)[0] for k in idx]
    return np.array([band.freqs[k] + d * rbw for k, d in zip(idx, deltas)], dtype=float)


def grid_fit(band: BandStatistics, found: Survey) -> GridFit:
    """How many strong lines lie off the grid of ``found`` and which broadcast grid fits them.

    A Region 2 band (10 kHz grid) surveyed on a 9 kHz grid shows only the few
    carriers that fall near a 9 kHz channel; this tells the rest are there.
    """
    lines = _strong_lines(band, found)
    off = int(np.sum(~_on_grid(lines, found.spacing_hz)))
    fits = {s: int(np.sum(_on_grid(lines, s))) for s in BROADCAST_SPACINGS_HZ}
    return GridFit(spacing_hz=float(found.spacing_hz), lines_hz=tuple(float(f) for f in lines), off_grid=off,
                   fits=fits)


def survey_carriers(reader, *, spacing_hz=10e3, start_s=0.0, duration_s=None, progress=None,
                    threshold_db=DEFAULT_THRESHOLD_DB) -> list:
    """The carriers of :func:`survey`, strongest first, as a list of :class:`Carrier`."""
    return list(survey(reader, spacing_hz=spacing_hz, start_s=start_s, duration_s=duration_s,
                       threshold_db=threshold_db, progress=progress).carriers)
