"""The carrier AGC's documented model, solved independently of sdrx's loop (scipy.integrate).

The envelope a(t) runs through the carrier filter 1/(1 + sτ_f)² (two RC
sections), whose output is the level L (dB); the gain g (dB) approaches
reference − L with time constant τ = attack (level too high) or release:

    dg/dt = (reference − L(t) − g)/τ
"""

from __future__ import annotations

import math

from scipy import integrate

__all__ = ["agc_model_step"]


def agc_model_step(t, level0_db, level1_db, g0, ref_db, tau_f, tau_attack, tau_release):
    """The gain (dB) at times ``t`` after a step of the envelope's level from a settled state.

    Parameters
    ----------
    t : ndarray
        Times after the step, s (starting at 0).
    level0_db, level1_db : float
        The envelope's level (dB, ungained) before and after the step.
    g0 : float
        The settled gain before the step, dB.
    ref_db : float
        The level the loop holds (reference less the fixed gains), dB.
    tau_f, tau_attack, tau_release : float
        Time constants, s.
    """
    a1 = 10 ** (level1_db / 20)
    a0 = 10 ** (level0_db / 20)

    def rhs(_t, y):
        f1, f2, g = y
        e = ref_db - (20 * math.log10(f2) + g)
        return [(a1 - f1) / tau_f, (f1 - f2) / tau_f, e / (tau_attack if e < 0 else tau_release)]

    sol = integrate.solve_ivp(rhs, (t[0], t[-1]), [a0, a0, g0], t_eval=t, max_step=2e-4, rtol=1e-8, atol=1e-10)
    return sol.y[2]
