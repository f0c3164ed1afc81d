"""Element values (g-values) of low-pass ladder prototypes, and the end-resonator Q they imply.

A band-pass IF filter built from coupled resonators (the usual LC or ceramic
realisation of a Butterworth or Chebyshev response) needs its end resonators
loaded to an external Q of Q_e = g0·g1·f0/BW at the input and g_n·g_{n+1}·f0/BW
at the output, BW being the design bandwidth (−3 dB for Butterworth, the
ripple band for Chebyshev).

Notes
-----
Formulas: the closed forms for maximally flat and equal-ripple doubly
terminated ladders (Matthaei, Young & Jones, *Microwave Filters,
Impedance-Matching Networks, and Coupling Structures*, ch. 4; the same in
Zverev, *Handbook of Filter Synthesis*):

- Butterworth: g_k = 2·sin((2k − 1)π/2n), g_{n+1} = 1.
- Chebyshev (ripple Ap dB): β = ln(coth(Ap/17.37)), γ = sinh(β/2n),
  a_k = sin((2k − 1)π/2n), b_k = γ² + sin²(kπ/n), g1 = 2a1/γ,
  g_k = 4a_{k−1}a_k/(b_{k−1}g_{k−1}), g_{n+1} = 1 (n odd) or coth²(β/4) (n even).

Bessel and elliptic ladders have no such closed forms (they need a full
ladder synthesis) and are not given here.
"""

from __future__ import annotations

import math
from typing import Optional, Tuple

__all__ = ["g_values", "end_resonator_q"]


def g_values(response: str, order: int, ripple_db: float = 0.5) -> Optional[Tuple[float, ...]]:
    """g0, g1 … g_n, g_{n+1} of a low-pass ladder prototype, or None where no closed form exists.

    Examples
    --------
    >>> [round(g, 4) for g in g_values("butterworth", 2)]
    [1.0, 1.4142, 1.4142, 1.0]
    >>> [round(g, 4) for g in g_values("chebyshev", 3, 0.5)]
    [1.0, 1.5963, 1.0967, 1.5963, 1.0]
    """
    n = int(order)
    if response == "butterworth":
        return (1.0,) + tuple(2 * math.sin((2 * k - 1) * math.pi / (2 * n)) for k in range(1, n + 1)) + (1.0,)
    if response == "chebyshev":
        beta = math.log(1.0 / math.tanh(ripple_db / (40.0 / math.log(10.0))))   # handbooks round 40/ln 10 to 17.37
        gamma = math.sinh(beta / (2 * n))
        a = [math.sin((2 * k - 1) * math.pi / (2 * n)) for k in range(1, n + 1)]
        b = [gamma ** 2 + math.sin(k * math.pi / n) ** 2 for k in range(1, n + 1)]
        g = [2 * a[0] / gamma]
        for k in range(2, n + 1):
            g.append(4 * a[k - 2] * a[k - 1] / (b[k - 2] * g[-1]))
        g_load = 1.0 if n % 2 else 1.0 / math.tanh(beta / 4) ** 2
        return (1.0,) + tuple(g) + (g_load,)
    return None


def end_resonator_q(response: str, order: int, f0_hz: float, bandwidth_hz: float,
                    ripple_db: float = 0.5) -> Optional[Tuple[float, float]]:
    """External Q of the input and output resonators of a coupled-resonator band-pass.

    Returns
    -------
    (q_in, q_out) or None
        None for responses without closed-form g-values (bessel, elliptic)
        and for tuned-circuit stages (whose Q is the circuit's own).

    Examples
    --------
    >>> [round(q, 1) for q in end_resonator_q("butterworth", 2, 455e3, 9e3)]
    [71.5, 71.5]
    """
    g = g_values(response, order, ripple_db)
    if g is None:
        return None
    ratio = f0_hz / bandwidth_hz
    return g[0] * g[1] * ratio, g[-2] * g[-1] * ratio
