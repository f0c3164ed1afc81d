"""Fast path: the complex-envelope equivalent of the superheterodyne.

The wanted channel w (around the tuning) and, where the capture holds it,
the image channel v are cut out at the channel rate. A real mixer leaves

    high-side:  u = K_w·conj(w) + K_im·v        low-side:  u = K_w·w + K_im·conj(v)

(a low-side LO below the IF has its image at 2·f_IF − f_t, which arrives
upright through the sum product: u = K_w·w + conj(K_im)·v)

(conversion factors 1/2 for a real multiplier, K1/K2 for a quadrature
mixer). Each IF stage acts on u through H_eq(x) = H(f_IF + x): its
singularities near +f_IF, moved to 0 Hz and mapped with z = e^{sT}, run as a
complex IIR at the channel rate; the rest of H (the far singularities and the
small difference between analog and digital near parts) is smooth and goes
into the channelizer's response together with the preselector, so the
product equals the analog response at every frequency of the channel.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from ..dsp.channelizer import ChannelSpec, Channelizer
from ..dsp.discretize import lowpass_equivalent, split_near_far

__all__ = ["FastFrontEnd", "image_coverage", "MAX_FIR_LAG"]

#: channel samples of the IF stages' near-part delay left in the channelizer's FIR (its half-length is
#: 32 channel samples; up to 12 the realised response stays within 3e-5 of the design)
MAX_FIR_LAG = 8


def image_coverage(f_im_hz: float, band_hz, plan) -> str:
    """How much of the image channel the capture holds: "inside", "partly" or "outside".

    "inside" when the channel's flat part (± plan.f_pass_hz) lies in the band,
    "partly" when some of its window (± plan.f_stop_hz) does.
    """
    lo, hi = band_hz
    if f_im_hz - plan.f_pass_hz >= lo and f_im_hz + plan.f_pass_hz <= hi:
        return "inside"
    if f_im_hz + plan.f_stop_hz > lo and f_im_hz - plan.f_stop_hz < hi:
        return "partly"
    return "outside"


class FastFrontEnd:
    """Capture samples -> IF output complex envelope u at the channel rate.

    Parameters
    ----------
    design : ChainDesign
    plan : ChannelPlan
    kind : str
        "iq" or "real".
    center_hz : float or None
    band_hz : (float, float)
    tune_hz : float
    first_sample : int
    extra : sequence of ChannelSpec
        More channels to cut from the capture in the same pass (the receiver's monitor).
    on_extra : callable, optional
        Receives the extra channels' outputs, a list in the order of ``extra``.
    """

    def __init__(self, design, plan, kind, center_hz, band_hz, tune_hz, first_sample=0, extra=(), on_extra=None):
        self.design = design
        self.plan = plan
        fs_ch = plan.fs_ch
        sos_list, corrs = [], []
        lag = 0
        for st in design.stages:
            sos, corr = lowpass_equivalent(st.z, st.p, st.k, st.f0_hz, fs_ch)
            sos_list.append(sos)
            corrs.append(corr)
            zn, pn, _zf, _pf = split_near_far(st.z, st.p)
            lag += len(pn) - len(zn)
        self.sos = np.vstack(sos_list)
        self.zi = np.zeros((self.sos.shape[0], 2), complex)
        # Each stage's correction carries the delay of its near part written in z^-1 form (one
        # channel sample per excess pole). The channelizer's FIR holds MAX_FIR_LAG samples of it
        # with its response unchanged (to 3e-5); the rest runs as a delay line.
        self.delay_line = max(0, lag - MAX_FIR_LAG)
        self._held = np.zeros(self.delay_line, complex)
        advance = self.delay_line

        def C(x):
            out = np.ones(np.shape(x), complex)
            for c in corrs:
                out = out * c(x)
            if advance:
                out = out * np.exp(2j * np.pi * np.asarray(x, dtype=float) * advance / fs_ch)
            return out

        high = design.injection == "high"
        pre = design.preselector
        kw, ki = design.mixer.k_wanted, design.mixer.k_image
        f_t = tune_hz
        f_im = design.image_hz(tune_hz)
        off = 0.0 if kind == "real" else center_hz

        # the image reaches the IF inverted through the difference product, except that of a
        # low-side LO below the IF (f_im = 2·IF − f_t), which arrives upright through the sum
        # f_im + f_LO, with the conjugate factor conj(K2) (the LO's e^{+jθ} part)
        by_sum = not high and design.lo_hz(tune_hz) < design.if_hz
        if high:
            resp_w = lambda d: kw * pre.response(f_t + d, f_t) * np.conj(C(-d))  # noqa: E731
        else:
            resp_w = lambda d: kw * pre.response(f_t + d, f_t) * C(d)  # noqa: E731
        if high:
            resp_v = lambda d: ki * pre.response(f_im + d, f_t) * C(d)  # noqa: E731
        elif by_sum:
            resp_v = lambda d: np.conj(ki) * pre.response(f_im + d, f_t) * C(d)  # noqa: E731
        else:
            resp_v = lambda d: ki * pre.response(f_im + d, f_t) * np.conj(C(-d))  # noqa: E731
        self.conj_w = high
        self.conj_v = not high and not by_sum
        cover = image_coverage(f_im, band_hz, plan)
        self.image_in_capture = cover == "inside"
        self.image_partly = cover == "partly"
        chans = [ChannelSpec(f_t - off, resp_w)]
        if cover != "outside":
            chans.append(ChannelSpec(f_im - off, resp_v))
        self.has_image = len(chans) == 2
        self._n_own = len(chans)
        self._on_extra = on_extra
        self.channelizer = Channelizer(plan, kind == "iq", chans + list(extra), first_sample=first_sample)
        self._drop = plan.delay_out  # FIR centring delay, removed once

    def _combine(self, outs):
        return self._if_stages(self._mix(outs))

    def _mix(self, outs):
        """The mixer: wanted and image channels -> u, the IF stages' input (FIR delay removed once)."""
        u = np.conj(outs[0]) if self.conj_w else outs[0]
        if self.has_image:
            u = u + (np.conj(outs[1]) if self.conj_v else outs[1])
        if self._drop:
            k = min(self._drop, len(u))
            u = u[k:]
            self._drop -= k
        return u

    def _if_stages(self, u):
        if len(u) == 0:
            return u
        y, self.zi = signal.sosfilt(self.sos, u, zi=self.zi)
        return self._delay(y)

    def _delay(self, y):
        if not self.delay_line:
            return y
        joined = np.concatenate([self._held, y])
        self._held = joined[len(y):]
        return joined[:len(y)]

    def _split(self, outs):
        if self._on_extra is not None and len(outs) > self._n_own:
            self._on_extra(outs[self._n_own:])
        return self._combine(outs[:self._n_own])

    def process(self, x):
        return self._split(self.channelizer.process(x))

    def flush(self):
        z = np.zeros(self.plan.overlap, self.channelizer.dtype)
        a = self._split(self.channelizer.process(z))
        b = self._split(self.channelizer.flush())
        rest, self._held = self._held, np.zeros(0, complex)
        return np.concatenate([a, b, rest])
