"""Noise blanker: impulses cut out of the wideband signal, the gap filled by AR interpolation.

A receiver's blanker works ahead of the narrow IF filters: a pulse of a few
microseconds is easy to find and to remove in the wideband signal, and a
narrow filter would stretch it into a click of milliseconds that can no
longer be told from the programme. Here the blanker runs on the capture
samples, ahead of the channelizer (fast path) or of the preselector and
mixer (exact path), at the capture's full rate.

Three steps, all vectorised over the block:

1. **Level.** The running level is the median of |x|² over fixed segments of
   ``level_ms`` on the capture's absolute sample grid. A median is not moved
   by the pulses it has to find (a few samples of a segment of thousands).
2. **Detection.** A sample is a pulse when |x|² exceeds the level by
   ``threshold_db``; every pulse sample blanks ``width_us`` around it
   (centred), and blanked runs closer than the interpolator's order are
   merged into one gap. A run longer than ``MAX_GAP_WIDTHS`` widths is no
   impulse (a signal coming up under a level that has not caught up yet):
   it is left alone and counted apart.
3. **Fill.** Each gap is filled by least-squares interpolation under an
   autoregressive model of the signal around it (module Notes), so the
   stations of the band run on through the gap instead of meeting a hole
   (zeros) or a ramp (linear interpolation cannot follow a station that
   turns many degrees per sample).

The output is the input with the gaps replaced; all other samples pass
unchanged. Processing runs on whole level segments from an internal buffer
and holds back the last segments until the ones after them are known, so the
output does not depend on how the input is split into blocks; :meth:`NoiseBlanker.flush`
returns the held samples at the end of the input.

Notes
-----
AR interpolation (Janssen, Veldhuis & Vries, "Adaptive interpolation of
discrete-time signals that can be modeled as autoregressive processes",
IEEE Trans. ASSP 34(2), 1986, pp. 317-330; Godsill & Rayner, *Digital
Audio Restoration*, Springer 1998, ch. 5): with the prediction-error filter
a (a_0 = 1, order p) fitted to the samples around the gap by the covariance
method, the missing samples x_m minimise the total prediction error
Σ_n |Σ_k a_k x[n−k]|². Setting the derivative to zero gives, for each
missing index m,

    Σ_{j missing} c_{m−j} x[j] = −Σ_{n known} c_{m−n} x[n],   c_d = Σ_k conj(a_k)·a_{k+d},

a small Hermitian Toeplitz system per gap.
"""

from __future__ import annotations

import numpy as np
from scipy import linalg

__all__ = ["NoiseBlanker", "AR_ORDER", "CONTEXT", "MAX_GAP_WIDTHS"]

AR_ORDER = 32        # order p of the interpolator's AR model
CONTEXT = 256        # samples each side of a gap that the model is fitted to
MAX_GAP_WIDTHS = 8   # a blanked run longer than this many widths is no impulse: left alone


class NoiseBlanker:
    """Streaming noise blanker on capture samples.

    Parameters
    ----------
    spec : BlankerSpec
        ``threshold_db``, ``width_us``, ``level_ms``.
    fs : float
        Capture sample rate, Hz.
    first_sample : int
        Absolute index of the first sample fed (the level segments lie on the
        whole capture's grid, so an excerpt finds the same pulses).

    Attributes
    ----------
    pulses : int
        Gaps blanked so far.
    blanked : int
        Samples replaced so far.
    not_blanked : int
        Over-threshold runs too long to be impulses, left alone.

    Examples
    --------
    >>> import numpy as np
    >>> from sdrx.chain.spec import BlankerSpec
    >>> n = np.arange(20000)
    >>> x = np.exp(2j * np.pi * 0.1234 * n)            # a station turning 44 degrees per sample
    >>> x[[5000, 12000]] += 300.0                       # two impulses
    >>> nb = NoiseBlanker(BlankerSpec(enabled=True), fs=240e3)
    >>> y = np.concatenate([nb.process(x), nb.flush()])
    >>> nb.pulses, bool(np.max(np.abs(y - np.exp(2j * np.pi * 0.1234 * n))) < 1e-6)
    (2, True)
    """

    def __init__(self, spec, fs: float, first_sample: int = 0):
        self.fs = float(fs)
        self.seg = max(1, int(round(spec.level_ms * 1e-3 * fs)))
        self.half = int(round(spec.width_us * 1e-6 * fs / 2.0))        # blanked each side of a pulse sample
        self.ratio = 10.0 ** (spec.threshold_db / 10.0)                # on |x|²
        self.max_gap = MAX_GAP_WIDTHS * (2 * self.half + 1)
        self.p = AR_ORDER
        self.ctx = CONTEXT
        # samples past a sample's segment that must be known before it can be emitted:
        # the next segment (detections within the width), a whole longest gap and its context
        self.lookahead = self.half + self.max_gap + self.p + self.ctx + 1
        self.history = self.ctx + self.p + self.half + 1
        self._buf = None
        self._pend: list = []              # input not yet joined to _buf (cheap appends for small blocks)
        self._pend_n = 0
        self._buf0 = int(first_sample)     # absolute index of _buf[0]
        self._out = int(first_sample)      # next absolute index to emit
        self.pulses = 0
        self.blanked = 0
        self.not_blanked = 0

    # -- streaming -------------------------------------------------------------------------
    def process(self, x: np.ndarray) -> np.ndarray:
        """Feed samples; return the blanked samples that are final so far (possibly none)."""
        x = np.asarray(x)
        if self._buf is None:
            self._buf = x[:0].copy()
        end = self._buf0 + len(self._buf) + self._pend_n + len(x)
        # whole level segments known, on the absolute grid
        seg_end = (end // self.seg) * self.seg
        limit = seg_end - self.lookahead
        if limit <= self._out:
            self._pend.append(x.copy())   # held: the caller may reuse its array
            self._pend_n += len(x)
            return self._buf[:0]
        self._pend.append(x)
        self._gather()
        return self._run(seg_end, limit, final=False)

    def _gather(self) -> None:
        if self._pend:
            self._buf = np.concatenate([self._buf] + self._pend)
            self._pend, self._pend_n = [], 0

    def flush(self) -> np.ndarray:
        """End of input: return every sample still held."""
        self._gather()
        if self._buf is None or self._buf0 + len(self._buf) <= self._out:
            return np.zeros(0) if self._buf is None else self._buf[:0]
        end = self._buf0 + len(self._buf)
        return self._run(end, end, final=True)

    # -- one pass over the buffer ------------------------------------------------------------
    def _run(self, known_end: int, limit: int, final: bool) -> np.ndarray:
        buf, b0 = self._buf, self._buf0
        n_known = known_end - b0
        power = _power(buf[:n_known])
        idx = _detect(power, b0, self.seg, self.ratio)
        runs = _spans(idx, self.half, n_known)
        # whether a sample is blanked is final once every detection within the width is known
        mask_end = n_known if final else n_known - self.half
        gaps = _merge([(s, min(e, mask_end)) for s, e in runs if s < mask_end], self.p)
        lim = limit - b0
        emit_to = lim
        keep = []
        long_runs = []
        for s, e in gaps:
            if s >= lim:
                break
            if e - s > self.max_gap:
                long_runs.append((s, e))
                continue
            if e > lim or (not final and e + self.p >= mask_end):
                emit_to = min(emit_to, s)
                break
            keep.append((s, e))
        out0 = self._out - b0
        emit_to = max(emit_to, out0)
        y = buf[out0:emit_to].copy()
        for s, e in keep:
            if s < out0 or e > emit_to:
                continue
            y[s - out0:e - out0] = _ar_fill(buf, runs, s, e, self.p, self.ctx)
            self.pulses += 1
            self.blanked += e - s
        self.not_blanked += sum(1 for s, e in long_runs if out0 <= s < emit_to)
        self._out = b0 + emit_to
        # keep history behind the next sample to emit, cut on the absolute segment grid
        if final:
            drop = len(buf)
        else:
            drop = ((b0 + emit_to - self.history) // self.seg) * self.seg - b0
            drop = max(0, min(drop, len(buf)))
        if drop:
            self._buf = buf[drop:]
            self._buf0 = b0 + drop
        return y


def _power(x: np.ndarray) -> np.ndarray:
    """|x|² in the samples' own precision (float32 for the usual complex64 captures)."""
    if np.iscomplexobj(x):
        return x.real * x.real + x.imag * x.imag
    return x * x


def _detect(power: np.ndarray, b0: int, seg: int, ratio: float) -> np.ndarray:
    """Indices where power > ratio × the median power of its absolute segment (a partial segment at
    either end of the buffer takes the median of the part there)."""
    n = len(power)
    first_edge = min(n, ((b0 + seg - 1) // seg) * seg - b0)   # start of the first whole segment
    found = []
    if first_edge > 0:
        found.append(np.flatnonzero(power[:first_edge] > ratio * _median(power[:first_edge])))
    whole = (n - first_edge) // seg
    if whole:
        blk = power[first_edge:first_edge + whole * seg].reshape(whole, seg)
        found.append(np.flatnonzero(blk > (ratio * _median(blk))[:, None].astype(blk.dtype)) + first_edge)
    rest = first_edge + whole * seg
    if rest < n:
        found.append(np.flatnonzero(power[rest:] > ratio * _median(power[rest:])) + rest)
    return np.concatenate(found) if found else np.zeros(0, np.int64)


def _median(power: np.ndarray):
    """Median along the last axis, of at most about 256 evenly spaced samples of each segment (the
    same robustness to a few pulse samples, a fraction of the work)."""
    step = max(1, power.shape[-1] // 256)
    return np.median(power[..., ::step], axis=-1)


def _spans(idx: np.ndarray, half: int, n: int) -> list:
    """(start, end) of the runs blanked when each detection blanks ``half`` samples either side
    (runs that touch are one), clipped to 0..n."""
    if len(idx) == 0:
        return []
    brk = np.flatnonzero(np.diff(idx) > 2 * half + 1)
    first = np.concatenate([[0], brk + 1])
    last = np.concatenate([brk, [len(idx) - 1]])
    starts = np.maximum(idx[first] - half, 0)
    ends = np.minimum(idx[last] + half + 1, n)
    return list(zip(starts.tolist(), ends.tolist()))


def _runs(mask: np.ndarray) -> list:
    """(start, end) of each run of True."""
    if not mask.any():
        return []
    m = np.concatenate([[False], mask, [False]])
    edges = np.flatnonzero(m[1:] != m[:-1])
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist()))


def _merge(gaps: list, dist: int) -> list:
    """Join runs separated by at most ``dist`` samples (the model needs ``p`` known samples between gaps)."""
    out = []
    for s, e in gaps:
        if out and s - out[-1][1] <= dist:
            out[-1] = (out[-1][0], e)
        else:
            out.append((s, e))
    return out


def _ar_fill(buf: np.ndarray, runs: list, s: int, e: int, p: int, ctx: int) -> np.ndarray:
    """Samples s..e−1 of ``buf`` interpolated under an AR(p) model fitted around the gap (module
    Notes); ``runs`` are every blanked run, whose samples the model leaves out."""
    lo, hi = max(0, s - ctx), min(len(buf), e + ctx)
    seg = buf[lo:hi].astype(np.complex128 if np.iscomplexobj(buf) else np.float64)
    good = np.ones(hi - lo, bool)
    for rs, re_ in runs:
        if re_ > lo and rs < hi:
            good[max(rs, lo) - lo:min(re_, hi) - lo] = False
    a = _prediction_error_filter(seg, good, p)
    if a is None:
        return np.zeros(e - s, buf.dtype)
    c = np.correlate(a, a, mode="full")      # c[p + d] = Σ_k a_{k+d}·conj(a_k)
    g = e - s
    # B[i, j] = c_{i−j}: Hermitian Toeplitz with first column c_0, c_1, ...
    col = np.zeros(g, c.dtype)
    k = min(g, p + 1)
    col[:k] = c[p:p + k]
    # right side: −Σ_d c_d x[m − d] over the known samples within p of the gap
    w0 = s - lo - p
    win = np.zeros(g + 2 * p, seg.dtype)
    j0 = max(0, -w0)
    j1 = min(g + 2 * p, len(seg) - w0)
    win[j0:j1] = seg[w0 + j0:w0 + j1] * good[w0 + j0:w0 + j1]
    win[p:p + g] = 0.0
    rhs = -_apply_c(win, c, g, p)
    x = linalg.solve_toeplitz((col, col.conj()), rhs)
    return x.astype(buf.dtype)


def _apply_c(win: np.ndarray, c: np.ndarray, g: int, p: int) -> np.ndarray:
    """r_i = Σ_{d=−p..p} c_d·win[p + i − d] for i = 0..g−1."""
    # np.convolve(win, c)[k] = Σ_j c[j]·win[k − j]; with j = p + d and k = 2p + i
    return np.convolve(win, c)[2 * p:2 * p + g]


def _prediction_error_filter(seg: np.ndarray, good: np.ndarray, p: int):
    """a = [1, a_1..a_p] minimising Σ|Σ_k a_k x[n−k]|² over the rows whose samples are all known
    (the covariance method of linear prediction), or None with too few known samples."""
    R = np.zeros((p + 1, p + 1), seg.dtype)
    rows = 0
    for s, e in _runs(good):
        if e - s > 2 * p:
            R += _covariance(seg[s:e], p)
            rows += e - s - p
    if rows < 2 * p:
        return None
    R[np.diag_indices(p + 1)] += 1e-9 * np.real(np.trace(R)) / (p + 1) + 1e-300
    sol = linalg.solve(R[1:, 1:], -R[1:, 0], assume_a="pos")
    return np.concatenate([[1.0], sol])


def _covariance(z: np.ndarray, p: int) -> np.ndarray:
    """R[k, l] = Σ_{n=p}^{L−1} conj(z[n−k])·z[n−l], k, l = 0..p, of one run of known samples.

    The first row is a correlation; the rest follows down each diagonal by
    R[k+1, l+1] = R[k, l] + conj(z[p−1−k])·z[p−1−l] − conj(z[L−1−k])·z[L−1−l]
    (O(L·p) instead of O(L·p²); the same recursion as the covariance method's
    fast form, Makhoul, "Linear prediction: a tutorial review", Proc. IEEE 63(4), 1975).
    """
    L = len(z)
    R = np.empty((p + 1, p + 1), z.dtype)
    # R[0, l] = Σ_{n=p}^{L−1} conj(z[n])·z[n−l]: numpy's correlate(a, v)[k] = Σ_n a[n+k]·conj(v[n])
    R[0] = np.correlate(z, z[p:], mode="valid")[::-1]
    head = z[p - 1::-1]            # z[p−1−k], k = 0..p−1
    tail = z[L - 1:L - 1 - p:-1]   # z[L−1−k], k = 0..p−1
    upd = np.conj(head)[:, None] * head[None, :] - np.conj(tail)[:, None] * tail[None, :]
    for k in range(p):
        R[k + 1, k + 1:] = R[k, k:p] + upd[k, k:p]
    iu = np.triu_indices(p + 1, 1)
    R[(iu[1], iu[0])] = np.conj(R[iu])
    return R
