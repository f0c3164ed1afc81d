"""Blind A/B/X trials (sdrx.compare.blind)."""

import math

import pytest
from scipy.stats import binom

from sdrx.compare.blind import MAX_TRIALS, chance_table, decode_key, encode_key, plan_trials
from sdrx.errors import ParameterError


def test_key_is_reproducible_from_the_seed():
    a = plan_trials(20, 2, seed=1234)
    b = plan_trials(20, 2, seed=1234)
    c = plan_trials(20, 2, seed=4321)
    assert a.x_is == b.x_is
    assert a.x_is != c.x_is  # 2**-20 chance of a false failure for two fixed seeds: checked, they differ
    assert set(a.x_is) == {"A", "B"}


def test_key_is_drawn_with_a_numpy_generator():
    import numpy as np

    draws = np.random.default_rng(99).integers(0, 2, size=12)
    assert plan_trials(12, 2, seed=99).x_is == tuple("A" if d == 0 else "B" for d in draws)


def test_pairs_cycle_through_every_pair():
    p = plan_trials(7, 3, seed=0)
    assert p.pairs == ((0, 1), (0, 2), (1, 2), (0, 1), (0, 2), (1, 2), (0, 1))


def test_chance_is_the_binomial_tail():
    n = 16
    table = chance_table(n)
    for k, p in enumerate(table):
        # source: binomial distribution, P(K >= k) for K ~ B(n, 1/2), via scipy.stats and by the sum of C(n, j)/2^n
        assert p == pytest.approx(float(binom.sf(k - 1, n, 0.5)), rel=1e-12, abs=0)
        assert p == pytest.approx(sum(math.comb(n, j) for j in range(k, n + 1)) / 2**n, rel=1e-12)
    assert table[0] == 1.0
    assert table[n] == pytest.approx(2.0**-n)
    # common practice: 12 of 16 right is "significant at 5 %"
    assert table[12] < 0.05 < table[11]


def test_key_round_trips_and_is_not_plain():
    key = ["A", "B", "B", "A"]
    enc = encode_key(key, b"\x13\x37\x42")
    assert decode_key(enc, b"\x13\x37\x42") == key
    import base64
    import json

    plain = json.dumps(key, separators=(",", ":"))
    assert plain not in enc
    assert enc != base64.b64encode(plain.encode()).decode()


@pytest.mark.parametrize("n", [-1, MAX_TRIALS + 1, 2.5])
def test_bad_trial_count(n):
    with pytest.raises(ParameterError, match="--blind"):
        plan_trials(n, 2, seed=1)
