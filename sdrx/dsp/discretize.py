"""Discretisation of analog prototypes, real band-pass and complex low-pass equivalent.

Both use the matched-z (pole-zero mapping) transform z = e^{sT}: every
analog pole and zero keeps its exact position, the gain is matched at one
frequency, and excess zeros go to z = 0 (pure delay, no magnitude change).
At the rates sdrx uses (IF sampled at several MHz) this keeps a narrow
band-pass stage within a few hundredths of a dB of its analog response near
the IF, where a bilinear transform pre-warped at the IF would still be off
by its frequency-scale error (2θ/sin 2θ − 1, θ = π f_IF/fs).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["zpk_eval", "matched_z", "zpk_to_complex_sos", "split_near_far", "digital_response", "lowpass_equivalent"]

TWO_PI = 2.0 * math.pi


def zpk_eval(x, z, p, k):
    """k·Π(x − z)/Π(x − p) at the points x (s = j2πf for an analog filter, e^{jωT} for a digital one).

    Examples
    --------
    >>> complex(zpk_eval(2j, [0.0], [-1.0], 3.0)[0])
    (2.4+1.2j)
    """
    x = np.atleast_1d(np.asarray(x, dtype=complex))
    num = np.full(x.shape, complex(k))
    for zz in z:
        num = num * (x - zz)
    den = np.ones_like(x)
    for pp in p:
        den = den * (x - pp)
    return num / den


def matched_z(z, p, k, fs: float, f_match_hz: float):
    """Matched-z transform of an analog (z, p, k) at rate ``fs``.

    Parameters
    ----------
    z, p : array_like
        Analog zeros and poles, rad/s.
    k : float
        Analog gain.
    fs : float
        Sample rate, Hz.
    f_match_hz : float
        Frequency at which the digital gain equals the analog gain.

    Returns
    -------
    zd, pd : ndarray
        Digital zeros and poles (excess zeros placed at the origin).
    kd : complex
        Digital gain.

    Examples
    --------
    >>> import numpy as np
    >>> zd, pd, kd = matched_z([], [-1000.0], 1000.0, 48000.0, 0.0)
    >>> round(float(abs(digital_response(zd, pd, kd, [0.0], 48000.0)[0])), 9)
    1.0
    """
    z = np.asarray(z, complex)
    p = np.asarray(p, complex)
    T = 1.0 / fs
    zd = np.exp(z * T)
    pd = np.exp(p * T)
    extra = len(p) - len(z)
    if extra > 0:
        zd = np.concatenate([zd, np.zeros(extra, complex)])
    s = 1j * TWO_PI * f_match_hz
    ha = k * np.prod(s - z) / np.prod(s - p)
    hd = digital_response(zd, pd, 1.0, [f_match_hz], fs)[0]
    return zd, pd, complex(ha / hd)


def digital_response(zd, pd, kd, f_hz, fs: float):
    """Response of a digital (z, p, k) at frequencies ``f_hz`` (Hz, may be negative)."""
    f = np.atleast_1d(np.asarray(f_hz, dtype=float))
    return zpk_eval(np.exp(1j * TWO_PI * f / fs), zd, pd, kd)


def zpk_to_complex_sos(zd, pd, kd) -> np.ndarray:
    """Digital (z, p, k) -> second-order sections, complex coefficients allowed.

    Poles are paired in the order given (sorted by angle so that each
    section is well conditioned); zeros are matched to sections in the same
    order; the gain goes on the first section. The result runs with
    ``scipy.signal.sosfilt`` on complex data.
    """
    pd = list(np.asarray(pd, complex))
    zd = list(np.asarray(zd, complex))
    n = max(len(pd), len(zd))
    n_sec = max(1, (n + 1) // 2)
    pd = sorted(pd, key=lambda v: (np.angle(v), abs(v)))
    zd = sorted(zd, key=lambda v: (np.angle(v), abs(v)))
    pd += [0j] * (2 * n_sec - len(pd))
    zd += [0j] * (2 * n_sec - len(zd))
    sos = np.zeros((n_sec, 6), complex)
    for i in range(n_sec):
        z1, z2 = zd[2 * i], zd[2 * i + 1]
        p1, p2 = pd[2 * i], pd[2 * i + 1]
        sos[i, :3] = [1.0, -(z1 + z2), z1 * z2]
        sos[i, 3:] = [1.0, -(p1 + p2), p1 * p2]
    sos[0, :3] *= kd
    return sos


def split_near_far(z, p):
    """Split analog singularities into those near +jω0 (upper half plane) and the rest.

    Returns
    -------
    (z_near, p_near, z_far, p_far) : tuple of ndarray
    """
    z = np.asarray(z, complex)
    p = np.asarray(p, complex)
    zn = z[z.imag > 0]
    zf = z[~(z.imag > 0)]
    pn = p[p.imag > 0]
    pf = p[~(p.imag > 0)]
    return zn, pn, zf, pf


def lowpass_equivalent(z, p, k, f0_hz: float, fs: float):
    """Complex low-pass equivalent of a band-pass about f0, discretised at ``fs``.

    The singularities near +f0 are moved down by f0 and mapped with z = e^{sT}
    (unit gain at 0 Hz); the far ones (zeros at 0, poles near −f0) and the
    remaining exact difference are returned as a correction function that
    the channelizer applies in the frequency domain, so that
    ``digital(x) · correction(x) = H(f0 + x)`` exactly.

    Returns
    -------
    sos : ndarray
        Complex second-order sections of the near part.
    correction : callable
        ``correction(x_hz) -> complex``: H(f0 + x) / D(x).

    Examples
    --------
    >>> import numpy as np
    >>> from sdrx.chain.design import single_tuned_zpk
    >>> z, p, k = single_tuned_zpk(455e3, 60)
    >>> sos, corr = lowpass_equivalent(z, p, k, 455e3, 96e3)
    >>> x = np.array([-3e3, 0.0, 4e3])
    >>> from scipy.signal import sosfreqz
    >>> _, d = sosfreqz(sos, worN=x, fs=96e3, whole=True)
    >>> h = k * (1j * 2 * np.pi * (455e3 + x)) / np.prod([1j * 2 * np.pi * (455e3 + x) - pp for pp in p], axis=0)
    >>> bool(np.allclose(d * corr(x), h, rtol=1e-9))
    True
    """
    w0 = TWO_PI * f0_hz
    zn, pn, zf, pf = split_near_far(z, p)
    zn_s = zn - 1j * w0
    pn_s = pn - 1j * w0
    T = 1.0 / fs
    zd = np.exp(zn_s * T)
    pd = np.exp(pn_s * T)
    # unit gain at 0 Hz for the digital near part
    d0 = np.prod(1 - zd) / np.prod(1 - pd) if len(pd) else np.prod(1 - zd)
    kd = 1.0 / d0
    # causal form in z^-1: (1 - zd z^-1)/(1 - pd z^-1); pad zeros at origin
    n_extra = len(pd) - len(zd)
    zd_all = np.concatenate([zd, np.zeros(max(0, n_extra), complex)])
    sos = zpk_to_complex_sos(zd_all, pd, kd)

    def correction(x_hz):
        x = np.atleast_1d(np.asarray(x_hz, dtype=float))
        s = 1j * TWO_PI * (f0_hz + x)       # analog variable at the true IF frequency
        sn = 1j * TWO_PI * x                # shifted variable
        e = np.exp(1j * TWO_PI * x * T)
        out = np.full(x.shape, complex(k) / complex(kd))
        for zz in zf:
            out = out * (s - zz)
        for pp in pf:
            out = out / (s - pp)
        # near singularities: analog factor over digital factor, each smooth
        for zz, zzd in zip(zn_s, zd):
            out = out * _ratio(sn - zz, e, zzd, T)
        for pp, ppd in zip(pn_s, pd):
            out = out / _ratio(sn - pp, e, ppd, T)
        # digital near part written in z^-1 form: each factor (1 - r z^-1) = (e - r)/e
        return out * e ** (len(zd) - len(pd))

    return sos, correction


def _ratio(a, e, r, T):
    """(analog factor a) / (digital factor (e − r)), computed stably where both vanish."""
    d = e - r
    out = np.empty_like(a)
    small = np.abs(d) < 1e-12
    out[~small] = a[~small] / d[~small]
    # where e ≈ r: (e - r) ≈ r·(aT) to first order
    out[small] = 1.0 / (r * T)
    return out
