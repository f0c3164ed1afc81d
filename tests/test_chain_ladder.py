"""Ladder g-values and end-resonator Q of IF stages.

The g-values are checked physically, not against a table: the doubly
terminated ladder they define (shunt C g1, series L g2, … into the load
g_{n+1}) must transmit |S21|² equal to the prototype's |H|² that
scipy.signal designs (general-purpose reference library).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from sdrx.chain import design_chain
from sdrx.chain.ladder import end_resonator_q, g_values


def _ladder_s21_sq(g, w):
    """|S21|² of the shunt-C-first ladder g1…g_n between g0 (source R) and g_{n+1}."""
    n = len(g) - 2
    out = np.empty(len(w))
    for i, wi in enumerate(w):
        s = 1j * wi
        T = np.eye(2, dtype=complex)
        for k in range(1, n + 1):
            if k % 2:   # shunt capacitor
                T = T @ np.array([[1, 0], [s * g[k], 1]])
            else:       # series inductor
                T = T @ np.array([[1, s * g[k]], [0, 1]])
        rs = g[0]
        # g_{n+1} is a load resistance after a shunt C (n odd), a load conductance after a series L (n even)
        rl = g[n + 1] if n % 2 else 1.0 / g[n + 1]
        (A, B), (C, D) = T
        vl_over_vs = rl / (A * rl + B + C * rs * rl + D * rs)
        out[i] = 4 * rs / rl * abs(vl_over_vs) ** 2
    return out


@pytest.mark.parametrize("n", [1, 2, 3, 4, 5, 6])
def test_butterworth_ladder_transmits_the_butterworth_response(n):
    w = np.linspace(0.05, 3.0, 60)
    _, h = signal.freqs(*signal.butter(n, 1.0, analog=True), worN=w)
    np.testing.assert_allclose(_ladder_s21_sq(g_values("butterworth", n), w), np.abs(h) ** 2,
                               rtol=1e-9, atol=1e-12)   # source: scipy.signal.butter (analog prototype)


@pytest.mark.parametrize("n, rp", [(2, 0.5), (3, 0.5), (4, 0.1), (5, 1.0), (6, 0.5)])
def test_chebyshev_ladder_transmits_the_chebyshev_response(n, rp):
    w = np.linspace(0.05, 3.0, 60)
    _, h = signal.freqs(*signal.cheby1(n, rp, 1.0, analog=True), worN=w)
    np.testing.assert_allclose(_ladder_s21_sq(g_values("chebyshev", n, rp), w), np.abs(h) ** 2,
                               rtol=1e-9, atol=1e-12)   # source: scipy.signal.cheby1 (analog prototype)


def test_end_resonator_q_of_the_medium_preset():
    st = design_chain("medium").stages[0]   # Butterworth, order 2, 9 kHz at 455 kHz
    q_in, q_out = st.end_resonator_q
    # Q_e = g0·g1·f0/BW with g1 = 2·sin(π/4) (maximally flat ladder: Matthaei, Young & Jones, Microwave Filters,
    # Impedance-Matching Networks, and Coupling Structures (1964), ch. 4; from memory)
    assert q_in == pytest.approx(2 * np.sin(np.pi / 4) * 455e3 / 9e3, rel=1e-12)
    assert q_out == pytest.approx(q_in, rel=1e-12)
    assert design_chain("medium").stages[1].end_resonator_q is None   # a tuned circuit: its own Q
    assert end_resonator_q("elliptic", 4, 455e3, 5e3) is None
