"""Many AGCs stepped as one (sdrx/dsp/agc_batch.py) against each AGC stepping alone.

A consistency check against sdrx's own single AGC (which tests/test_receiver_agc.py checks against the
loop's equations and the receiver's behaviour): the same gained samples, gain range and state, bit for bit,
for every branch of the loop (attack, release, hang, both clamps), with and without the carrier filter, and
for any block split.
"""

import copy

import numpy as np
import pytest

from sdrx.chain.spec import AgcSpec
from sdrx.dsp.agc import Agc
from sdrx.dsp.agc_batch import alike_key, process_together

FS = 96000.0


def _envelopes(rng, n_agc, n):
    """Carriers that step up and down by tens of dB (attack, release, hang) and one beyond each clamp."""
    t = np.arange(n)
    rows = []
    for k in range(n_agc):
        level = 10 ** (rng.uniform(-70, -10, 6) / 20)
        steps = level[np.minimum(t * 6 // n, 5)]
        rows.append(steps * (1 + 0.5 * np.cos(2 * np.pi * rng.uniform(200, 3000) * t / FS)))
    rows[0] = np.full(n, 1e-7)            # needs more than max_gain_db: held at the upper clamp
    rows[1] = np.full(n, 3.0)             # needs less than min_gain_db: held at the lower clamp
    phase = np.exp(2j * np.pi * rng.uniform(0, 1, (n_agc, 1)))
    return np.array(rows) * phase


def _settled(spec, n_agc, rng, first):
    """AGCs past their held start (stepped alone until then), at the same point of the grid."""
    agcs = [Agc(spec, FS, fixed_gain_db=10.0, start_gain_db=0.0, step=64, grid_offset=5, freeze=700,
                stats_from=900) for _ in range(n_agc)]
    for a, row in zip(agcs, first):
        a.process(row)
    return agcs


@pytest.mark.parametrize("spec", [AgcSpec(), AgcSpec(hang_ms=40.0, attack_ms=5.0, release_ms=80.0),
                                  AgcSpec(carrier_filter_ms=0.0, max_gain_db=40.0, min_gain_db=-5.0)])
@pytest.mark.parametrize("block", [1, 61, 64, 997, 50000])
def test_together_equals_each_alone(spec, block):
    rng = np.random.default_rng(3)
    n_agc, n = 5, 40000 if block > 1 else 3000
    u = _envelopes(rng, n_agc, n + 2000)
    together = _settled(spec, n_agc, rng, u[:, :2000])
    alone = copy.deepcopy(together)
    assert len({alike_key(a) for a in together}) == 1 and alike_key(together[0]) is not None
    got = np.concatenate([process_together(together, u[:, i:i + block], np.abs(u[:, i:i + block]))
                          for i in range(2000, n + 2000, block)], axis=1)
    want = np.array([np.concatenate([a.process(row[i:i + block])[0] for i in range(2000, n + 2000, block)])
                     for a, row in zip(alone, u)])
    np.testing.assert_array_equal(got, want)
    for a, b in zip(together, alone):
        assert (a.gain_min_db, a.gain_max_db, a.state.gain_db, a.state.hang_left) == \
               (b.gain_min_db, b.gain_max_db, b.state.gain_db, b.state.hang_left)
        np.testing.assert_array_equal(a.state.zi, b.state.zi)
    # the clamps were reached (so the test covers them)
    assert together[0].state.gain_db == spec.max_gain_db
    assert together[1].state.gain_db == spec.min_gain_db


def test_an_agc_still_held_at_its_start_steps_alone():
    a = Agc(AgcSpec(), FS, fixed_gain_db=0.0, start_gain_db=0.0, freeze=10000)
    assert alike_key(a) is None                       # the settling step is per AGC
    held = Agc(AgcSpec(), FS, fixed_gain_db=0.0, start_gain_db=0.0, hold_gain_db=20.0)
    assert alike_key(held) is None                    # a held gain has no loop to batch
    a.process(np.full(20000, 0.01 + 0j))
    assert alike_key(a) is not None
