"""Figures shown side by side on the comparison page.

Designed figures come from the chain design (its RF-to-IF response, the same
objects the receiver runs); SINAD is measured on each output's audio. The
chain's audio bandwidth is :func:`sdrx.analysis.audio_response.audio_bandwidth_hz`.
"""

from __future__ import annotations

import numpy as np

from ..units import db10

__all__ = [
    "selectivity_curve",
    "designed_figures",
    "sinad_db",
]

#: RF offsets of the plotted selectivity curves: ±30 kHz in 25 Hz steps
_SPAN_HZ = 30e3
_STEP_HZ = 25.0


def selectivity_curve(design, tune_hz: float, offsets_hz=None):
    """Relative RF selectivity of a chain for the plot: dB at ``tune_hz + offsets_hz`` re the tune.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
        The station's carrier frequency.
    offsets_hz : array_like, optional
        Offsets from the tune; default ±30 kHz in 25 Hz steps.

    Returns
    -------
    (offsets_hz, response_db) : tuple of ndarray

    Notes
    -----
    :func:`sdrx.analysis.selectivity.relative_response_db`: ``20·log10(|H(f_t + Δf)| / |H(f_t)|)``
    with H the design's RF response (single-signal selectivity, AGC off: ITU-R SM.332).

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> off, db = selectivity_curve(design_chain("medium"), 1e6, [0.0, 10e3])
    >>> float(db[0]), bool(db[1] < -20)
    (0.0, True)
    """
    from ..analysis.selectivity import relative_response_db

    if offsets_hz is None:
        n = int(round(_SPAN_HZ / _STEP_HZ))
        offsets_hz = np.arange(-n, n + 1) * _STEP_HZ
    off = np.asarray(offsets_hz, dtype=float)
    return off, np.asarray(relative_response_db(design, tune_hz, tune_hz + off), dtype=float)


def designed_figures(design, tune_hz: float, spacing_hz: float) -> dict:
    """Bandwidths and rejections of a chain design at one tuning, as compare.json holds them.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
        The station's carrier frequency.
    spacing_hz : float
        Channel spacing for the adjacent-channel figures.

    Returns
    -------
    dict
        ``bandwidth_6db_hz``, ``bandwidth_60db_hz`` (None if not reached),
        ``shape_factor`` (60 dB / 6 dB width), ``adjacent_rejection_db``
        {``lower``, ``upper``, ``worst``} at ``tune ∓ spacing``, ``spacing_hz``,
        ``image_hz``, ``image_rejection_db``.

    Raises
    ------
    ParameterError
        From :func:`sdrx.analysis.selectivity.validate_tuning` (tune or spacing unusable).

    Notes
    -----
    The figures are :func:`sdrx.analysis.selectivity.designed_figures` (the
    report's), reshaped. Rejection is the response at the tune over the
    response at the other frequency, equal inputs (Federal Standard 1037C).

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> f = designed_figures(design_chain("narrow"), 1e6, 10e3)
    >>> f["bandwidth_6db_hz"] < 6e3 < f["bandwidth_60db_hz"]
    True
    """
    from ..analysis import selectivity

    fig = selectivity.designed_figures(design, tune_hz, spacing_hz)
    adj = fig.adjacent_rejection_db
    lower = adj[str(int(round(-spacing_hz)))]
    upper = adj[str(int(round(spacing_hz)))]
    return {
        "bandwidth_6db_hz": fig.bandwidth_hz["6"],
        "bandwidth_60db_hz": fig.bandwidth_hz["60"],
        "shape_factor": fig.shape_factor,
        "adjacent_rejection_db": {"lower": lower, "upper": upper, "worst": min(lower, upper)},
        "spacing_hz": float(spacing_hz),
        "image_hz": float(design.image_hz(tune_hz)),
        "image_rejection_db": fig.image_rejection_db,
    }


def sinad_db(x, fs: float, tone_hz: float, *, skip_s: float = 0.25) -> float:
    """SINAD of a single-tone output, dB: total power over power with the tone removed.

    Parameters
    ----------
    x : array_like
        Mono audio carrying one test tone.
    fs : float
        Sample rate, Hz.
    tone_hz : float
        The tone's frequency (from the capture's truth sidecar).
    skip_s : float
        Start-up (AGC settling, filter transients) left out, seconds.

    Returns
    -------
    float

    Notes
    -----
    ``SINAD = 10·log10(P_total / (P_total − P_tone))`` with the mean removed
    (IEEE Std 1241-2010, SINAD definition). The tone is removed by a
    least-squares fit of ``a·cos(ωn) + b·sin(ωn)`` at the known frequency: an
    ideal notch of zero width that leaves noise and distortion in place.

    Examples
    --------
    >>> import numpy as np
    >>> n = np.arange(48000)
    >>> rng = np.random.default_rng(0)
    >>> x = np.sin(2 * np.pi * 1000 * n / 48000) + 0.01 * rng.standard_normal(n.size)
    >>> round(sinad_db(x, 48000.0, 1000.0))
    37
    """
    a = np.asarray(x, dtype=np.float64)
    first = min(int(round(skip_s * fs)), a.size // 2)
    a = a[first:]
    a = a - a.mean()
    n = np.arange(a.size)
    w = 2 * np.pi * tone_hz / fs
    basis = np.column_stack([np.cos(w * n), np.sin(w * n)])
    coef, *_ = np.linalg.lstsq(basis, a, rcond=None)
    residual = a - basis @ coef
    total = float(np.mean(a * a))
    rest = float(np.mean(residual * residual))
    if rest <= 0:
        return float("inf")
    return float(db10(total / rest))
