"""Chain design: a validated spec -> immutable design objects.

A design holds each filter as its analog prototype (zeros, poles, gain in
rad/s, band-pass about the IF), the preselector, the mixer's conversion
factors and the LO plan. The chain (``sdrx.run``) and the reports
(``sdrx.analysis``) both use these objects; neither re-derives a filter.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Tuple

import numpy as np
from scipy import signal

from ..dsp.discretize import zpk_eval
from ..errors import ParameterError
from .ladder import end_resonator_q
from .spec import ChainSpec, IfStageSpec, PreselectorSpec, MixerSpec, load_chain

__all__ = [
    "IfStageDesign",
    "PreselectorDesign",
    "MixerDesign",
    "ChainDesign",
    "design_chain",
    "lo_frequency",
    "image_frequency",
    "design_if_stage",
    "single_tuned_zpk",
    "double_tuned_zpk",
]

TWO_PI = 2.0 * math.pi


def _freqs_zpk(z, p, k, f_hz):
    f = np.atleast_1d(np.asarray(f_hz, dtype=float))
    return zpk_eval(1j * TWO_PI * f, z, p, k)


def single_tuned_zpk(f0_hz: float, q: float):
    """Analog zpk of one parallel-tuned circuit of loaded Q, unity gain at f0.

    H(s) = (ω0/Q)·s / (s² + (ω0/Q)·s + ω0²), so that
    |H|/H0 = 1/sqrt(1 + Q²(f/f0 − f0/f)²) exactly (universal resonance curve).

    Examples
    --------
    >>> z, p, k = single_tuned_zpk(455e3, 50)
    >>> H = _freqs_zpk(z, p, k, [455e3, 455e3 * (1 + 1 / 100)])
    >>> round(float(abs(H[0])), 6)
    1.0
    """
    w0 = TWO_PI * f0_hz
    a = w0 / q
    p = np.roots([1.0, a, w0 * w0])
    return np.array([0.0 + 0j]), p.astype(complex), a


def double_tuned_zpk(f0_hz: float, q: float):
    """Analog zpk of two identical tuned circuits at critical coupling (kQ = 1).

    With D(s) = s² + (ω0/Q)s + ω0² and x = Q(f/f0 − f0/f),
    H(s) = 2(sω0/Q)² / (D² + (sω0/Q)²) gives |H| = 2/sqrt(4 + x⁴): flat top,
    −3 dB full width √2·f0/Q (coupled circuits: Terman, Radio Engineers'
    Handbook, McGraw-Hill 1943, sec. 3; from memory).

    Examples
    --------
    >>> z, p, k = double_tuned_zpk(455e3, 50)
    >>> round(float(abs(_freqs_zpk(z, p, k, [455e3])[0])), 6)
    1.0
    """
    w0 = TWO_PI * f0_hz
    a = w0 / q
    p = np.concatenate([np.roots([1.0, a * (1 + 1j), w0 * w0]), np.roots([1.0, a * (1 - 1j), w0 * w0])])
    return np.array([0.0 + 0j, 0.0 + 0j]), p, 2.0 * a * a


def lo_frequency(tune_hz, if_hz, injection="high"):
    """LO frequency: ``f + IF`` (high side) or ``f - IF`` (low side).

    Examples
    --------
    >>> lo_frequency(1000e3, 455e3)
    1455000.0
    """
    return tune_hz + if_hz if injection == "high" else tune_hz - if_hz


def image_frequency(tune_hz, if_hz, injection="high"):
    """Image frequency: ``f + 2·IF`` (high side) or ``|f - 2·IF|`` (low side).

    A low-side LO below the IF (f < 2·IF) has its image at 2·IF − f, which
    reaches the IF through the sum product.

    Examples
    --------
    >>> image_frequency(1000e3, 455e3)
    1910000.0
    >>> image_frequency(600e3, 455e3, "low")
    310000.0
    """
    return tune_hz + 2 * if_hz if injection == "high" else abs(tune_hz - 2 * if_hz)


@dataclass(frozen=True)
class IfStageDesign:
    """One IF stage: analog band-pass prototype about the IF, and its gain.

    Attributes
    ----------
    response : str
    order : int
        Prototype order (1 for tuned circuits).
    f0_hz : float
        Centre (geometric) frequency, the IF.
    bandwidth_hz : float
        Design bandwidth: −3 dB full width (ripple band for chebyshev/elliptic).
    loaded_q : float
        f0 / bandwidth for prototypes; the circuit's Q for tuned circuits.
    gain_db : float
    agc : bool
    z, p : ndarray
        Analog zeros and poles, rad/s.
    k : float
        Analog gain.
    """

    response: str
    order: int
    f0_hz: float
    bandwidth_hz: float
    loaded_q: float
    gain_db: float
    agc: bool
    z: np.ndarray
    p: np.ndarray
    k: float
    ripple_db: float = 0.0

    def freq_response(self, f_hz):
        """Analog response at real IF frequencies (gain_db not included)."""
        return _freqs_zpk(self.z, self.p, self.k, f_hz)

    @property
    def zpk(self):
        """(z, p, k) of the analog prototype, rad/s."""
        return self.z, self.p, self.k

    @property
    def end_resonator_q(self):
        """(input, output) external Q of the end resonators of a coupled-resonator realisation.

        Butterworth and Chebyshev stages only (see :mod:`sdrx.chain.ladder`); None otherwise.
        """
        if self.response not in ("butterworth", "chebyshev"):
            return None
        return end_resonator_q(self.response, self.order, self.f0_hz, self.bandwidth_hz, self.ripple_db)


def design_if_stage(st: IfStageSpec, if_hz: float, index: int = 1) -> IfStageDesign:
    """Design one IF stage from its spec.

    Low-pass prototypes (scipy.signal butter/cheby1/ellip/bessel, analog)
    are moved to a band-pass about the IF with ``lp2bp_zpk`` (geometric
    symmetry f0 = sqrt(f1·f2)); tuned circuits use their exact transfer
    functions.

    Examples
    --------
    >>> from sdrx.chain.spec import IfStageSpec
    >>> d = design_if_stage(IfStageSpec(response="butterworth", order=3, bandwidth_hz=9e3), 455e3)
    >>> len(d.p), round(d.loaded_q, 2)
    (6, 50.56)
    """
    w0 = TWO_PI * if_hz
    if st.response in ("single_tuned", "double_tuned"):
        if st.q is not None:
            q = st.q
        else:
            factor = 1.0 if st.response == "single_tuned" else math.sqrt(2.0)
            q = factor * if_hz / st.bandwidth_hz
        if st.response == "single_tuned":
            z, p, k = single_tuned_zpk(if_hz, q)
            bw = if_hz / q
        else:
            z, p, k = double_tuned_zpk(if_hz, q)
            bw = math.sqrt(2.0) * if_hz / q
        if bw >= 2 * if_hz:
            raise ParameterError(f"if_stage[{index}].q: {q:g} gives a bandwidth wider than twice the IF")
        return IfStageDesign(st.response, 1, if_hz, bw, q, st.gain_db, st.agc, z, p, float(k))
    n = st.order
    if st.response == "butterworth":
        z, p, k = signal.butter(n, 1.0, analog=True, output="zpk")
    elif st.response == "chebyshev":
        z, p, k = signal.cheby1(n, st.ripple_db, 1.0, analog=True, output="zpk")
    elif st.response == "elliptic":
        z, p, k = signal.ellip(n, st.ripple_db, st.stopband_db, 1.0, analog=True, output="zpk")
    elif st.response == "bessel":
        z, p, k = signal.bessel(n, 1.0, analog=True, output="zpk", norm="mag")
    else:  # pragma: no cover - spec validation prevents this
        raise ParameterError(f"if_stage[{index}].response: {st.response!r} unknown")
    bw = st.bandwidth_hz
    zb, pb, kb = signal.lp2bp_zpk(z, p, k, wo=w0, bw=TWO_PI * bw)
    ripple = st.ripple_db if st.response in ("chebyshev", "elliptic") else 0.0
    return IfStageDesign(st.response, n, if_hz, bw, if_hz / bw, st.gain_db, st.agc,
                         np.asarray(zb, complex), np.asarray(pb, complex), float(np.real(kb)), ripple)


@dataclass(frozen=True)
class PreselectorDesign:
    """RF selectivity ahead of the mixer.

    ``tracking`` is one single-tuned circuit of loaded Q that follows the
    tuning (resonant at the tuned frequency); ``lowpass``/``bandpass`` are
    fixed Butterworth filters; ``none`` passes everything.
    """

    kind: str
    q: float
    cutoff_hz: float
    low_hz: float
    high_hz: float
    order: int

    def zpk(self, tune_hz: float):
        """Analog (z, p, k) in rad/s for this tuning, or None for kind none."""
        if self.kind == "none":
            return None
        if self.kind == "tracking":
            return single_tuned_zpk(tune_hz, self.q)
        if self.kind == "lowpass":
            z, p, k = signal.butter(self.order, TWO_PI * self.cutoff_hz, analog=True, output="zpk")
        else:
            z, p, k = signal.butter(self.order, [TWO_PI * self.low_hz, TWO_PI * self.high_hz],
                                    btype="bandpass", analog=True, output="zpk")
        return np.asarray(z, complex), np.asarray(p, complex), float(np.real(k))

    def response(self, f_hz, tune_hz: float):
        """Complex RF response at RF frequency ``f_hz`` for this tuning."""
        f = np.atleast_1d(np.asarray(f_hz, dtype=float))
        zpk = self.zpk(tune_hz)
        if zpk is None:
            return np.ones(f.shape, complex)
        return _freqs_zpk(*zpk, f)


@dataclass(frozen=True)
class MixerDesign:
    """Mixer conversion factors.

    A real multiplier passes wanted and image each with 1/2. A quadrature
    (image-reject) mixer with gain ratio γ and phase error φ passes the
    wanted with K1 = (1 + γe^{-jφ})/2 and the image with K2 = (1 − γe^{-jφ})/2,
    so IRR = |K1/K2|² = (1+γ²+2γcosφ)/(1+γ²−2γcosφ) (Razavi, RF
    Microelectronics, 2nd ed., Prentice Hall 2011, ch. 4, image-reject
    receivers; from memory), both times the 1/2 of the multiplication. Both act
    on the upright envelopes (high-side u = conj(K1·w) + K2·v, low-side
    u = K1·w + conj(K2·v)), which is what the exact path's LO
    cos θ + jsγ·sin(θ + φ) gives.
    """

    kind: str
    gain_error_db: float
    phase_error_deg: float

    @property
    def gamma(self) -> float:
        return 10.0 ** (self.gain_error_db / 20.0)

    @property
    def phi_rad(self) -> float:
        return math.radians(self.phase_error_deg)

    @property
    def k_wanted(self) -> complex:
        """Conversion factor of the wanted side."""
        if self.kind == "real":
            return 0.5
        return 0.5 * (1 + self.gamma * np.exp(-1j * self.phi_rad)) / 2

    @property
    def k_image(self) -> complex:
        """Conversion factor of the image side."""
        if self.kind == "real":
            return 0.5
        return 0.5 * (1 - self.gamma * np.exp(-1j * self.phi_rad)) / 2


@dataclass(frozen=True)
class ChainDesign:
    """A whole chain: spec, preselector, mixer, IF stages, and the LO plan."""

    spec: ChainSpec
    preselector: PreselectorDesign
    mixer: MixerDesign
    stages: Tuple[IfStageDesign, ...]

    @property
    def name(self) -> str:
        return self.spec.name

    @property
    def if_hz(self) -> float:
        return self.spec.if_hz

    @property
    def injection(self) -> str:
        return self.spec.injection

    @property
    def agc(self):
        return self.spec.agc

    @property
    def detector(self):
        return self.spec.detector

    @property
    def audio(self):
        return self.spec.audio

    @property
    def frontend(self):
        """The spec's [frontend]: full scale in dBm and noise figure (each None when absent)."""
        return self.spec.frontend

    @property
    def blanker(self):
        return self.spec.blanker

    @property
    def notch(self):
        return self.spec.notch

    def lo_hz(self, tune_hz: float) -> float:
        """LO frequency: tune + IF (high-side) or tune − IF (low-side)."""
        return lo_frequency(tune_hz, self.if_hz, self.injection)

    def image_hz(self, tune_hz: float) -> float:
        """Image frequency: tune + 2·IF (high-side), |tune − 2·IF| (low-side).

        A low-side LO below the IF (tune < 2·IF) has its image at 2·IF − tune,
        which reaches the IF through the sum product f + f_LO.

        Examples
        --------
        >>> d = design_chain({"injection": "low"})
        >>> d.image_hz(1500e3), d.image_hz(600e3)
        (590000.0, 310000.0)
        """
        return image_frequency(tune_hz, self.if_hz, self.injection)

    def if_response(self, f_if_hz):
        """Product of every IF stage's analog response at IF frequencies (no gains)."""
        h = np.ones(np.shape(np.atleast_1d(f_if_hz)), complex)
        for st in self.stages:
            h = h * st.freq_response(f_if_hz)
        return h

    def rf_response(self, f_hz, tune_hz: float):
        """Voltage response from the antenna at RF ``f_hz`` to the IF output.

        Preselector × mixer conversion × IF stages evaluated at the IF
        frequency that ``f_hz`` mixes to, |f − f_LO| (or f + f_LO where that
        is nearer the IF: a low-side LO below the IF). Frequencies on the LO's
        far side, and those reaching the IF by the sum, take the mixer's image factor. Stage gains
        are not included. Divide by ``rf_response(tune_hz, tune_hz)`` for
        relative selectivity.

        Examples
        --------
        >>> d = design_chain({"preselector": {"kind": "none"}})
        >>> w, im = d.rf_response([1e6, d.image_hz(1e6)], 1e6)
        >>> round(float(abs(w / im)), 6)   # real mixer, no preselector: image as strong as wanted
        1.0
        """
        f = np.atleast_1d(np.asarray(f_hz, dtype=float))
        lo = self.lo_hz(tune_hz)
        f_if = np.abs(f - lo)
        # an LO below the IF also reaches it through the sum product f + f_LO (the image 2·IF − tune)
        by_sum = np.abs(f + lo - self.if_hz) < np.abs(f_if - self.if_hz)
        f_if = np.where(by_sum, f + lo, f_if)
        wanted_side = ((f < lo) if self.injection == "high" else (f > lo)) & ~by_sum
        k = np.where(wanted_side, self.mixer.k_wanted, self.mixer.k_image)
        return self.preselector.response(f, tune_hz) * k * self.if_response(f_if)

    @property
    def agc_stage_gain_db(self) -> float:
        """Sum of the gains of the AGC-marked stages (the AGC's starting gain)."""
        return float(sum(st.gain_db for st in self.stages if st.agc))

    @property
    def fixed_gain_db(self) -> float:
        """Sum of the gains of stages the AGC does not move (all stages when AGC is off)."""
        if not self.agc.enabled:
            return float(sum(st.gain_db for st in self.stages))
        return float(sum(st.gain_db for st in self.stages if not st.agc))


def design_chain(spec) -> ChainDesign:
    """Design a chain from a spec (preset name, TOML path, mapping or ChainSpec).

    Returns
    -------
    ChainDesign

    Raises
    ------
    ParameterError
        From spec validation or from a stage that cannot be realised.

    Examples
    --------
    >>> d = design_chain("medium")
    >>> d.lo_hz(1e6), d.image_hz(1e6)
    (1455000.0, 1910000.0)
    """
    if isinstance(spec, ChainDesign):
        return spec
    s = load_chain(spec)
    pre: PreselectorSpec = s.preselector
    mix: MixerSpec = s.mixer
    stages = tuple(design_if_stage(st, s.if_hz, i + 1) for i, st in enumerate(s.if_stages))
    return ChainDesign(
        spec=s,
        preselector=PreselectorDesign(pre.kind, pre.q, pre.cutoff_hz, pre.low_hz, pre.high_hz, pre.order),
        mixer=MixerDesign(mix.kind, mix.gain_error_db, mix.phase_error_deg),
        stages=stages,
    )
