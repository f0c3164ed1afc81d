"""Fading processes: statistics, fading rate, block invariance, spec validation."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from sdrx.errors import ParameterError
from sdrx.synth.fading import GaussianFading, parse_fading

GRID_FS = 2000.0


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


def _gains(rate, k_db, rng, n=400_000, fs=GRID_FS):
    return GaussianFading(rate, fs, rng, k_db).gains(0, n)


def test_rayleigh_power_is_exponential_with_unit_mean(rng):
    g = _gains(5.0, None, rng)  # 200 s at 5 Hz: about 1000 independent fades
    p = np.abs(g) ** 2
    # source: the envelope of a zero-mean complex Gaussian is Rayleigh, its power exponential:
    # P(|g|^2 <= x) = 1 - exp(-x / mean)  (Rappaport, Wireless Communications, 2nd ed. (2002), ch. 5; from memory)
    assert p.mean() == pytest.approx(1.0, rel=0.08)
    for x in (0.1, 0.5, 1.0, 2.0):
        assert np.mean(p <= x) == pytest.approx(1 - np.exp(-x), abs=0.04)
    # deep fades exist: 1 % of the time 20 dB below the mean (P = 1 - e^-0.01 ~ 1 %)
    assert np.mean(p < 0.01) == pytest.approx(1 - np.exp(-0.01), abs=0.006)


@pytest.mark.parametrize("k_db", [3.0, 6.0, 10.0])
def test_rician_k_factor_is_recovered(rng, k_db):
    g = _gains(5.0, k_db, rng)
    p = np.abs(g) ** 2
    gamma = p.var() / p.mean() ** 2
    # source: moment-method K estimate, K = sqrt(1 - gamma) / (1 - sqrt(1 - gamma)),
    # gamma = Var(|g|^2) / E(|g|^2)^2 (Greenstein, Michelson, Erceg, IEEE Commun. Letters 1999; from memory)
    k_est = np.sqrt(1 - gamma) / (1 - np.sqrt(1 - gamma))
    assert 10 * np.log10(k_est) == pytest.approx(k_db, abs=0.8)
    assert p.mean() == pytest.approx(1.0, rel=0.05)
    # steady part: mean of g is sqrt(K/(K+1)) (the line-of-sight amplitude)
    k = 10 ** (k_db / 10)
    assert abs(g.mean()) == pytest.approx(np.sqrt(k / (k + 1)), rel=0.05)


def test_fading_rate_is_the_half_power_half_width(rng):
    rate = 4.0
    g = _gains(rate, None, rng, n=800_000)
    f, pxx = signal.welch(g, fs=GRID_FS, nperseg=8192, return_onesided=False)
    order = np.argsort(f)
    f, pxx = f[order], pxx[order]
    dc = pxx[np.abs(f) < 0.5].mean()
    pos = f > 0
    # first positive frequency where the spectrum falls to half its 0 Hz value (-3 dB definition)
    half = f[pos][np.argmax(pxx[pos] < dc / 2)]
    assert half == pytest.approx(rate, rel=0.2)
    # the two sides are alike (no Doppler shift)
    neg = pxx[(f < -rate * 0.5) & (f > -rate)].mean()
    posv = pxx[(f > rate * 0.5) & (f < rate)].mean()
    assert neg == pytest.approx(posv, rel=0.25)


def test_gains_do_not_depend_on_how_they_are_asked_for():
    whole = GaussianFading(3.0, 48000.0, np.random.default_rng(1), 6.0).gains(0, 50_000)
    split = GaussianFading(3.0, 48000.0, np.random.default_rng(1), 6.0)
    parts = [split.gains(0, 1), split.gains(1, 7919), split.gains(7920, 42_080)]
    assert np.array_equal(np.concatenate(parts), whole)


def test_gains_move_smoothly_between_grid_points():
    fd = GaussianFading(1.0, 48000.0, np.random.default_rng(2))
    g = fd.gains(0, 48000)
    # one sample step is tiny compared with the gain itself: no steps or clicks
    assert np.max(np.abs(np.diff(g))) < 1e-3 * np.sqrt(np.mean(np.abs(g) ** 2))


@pytest.mark.parametrize("table, match", [
    ({"model": "rayleig", "rate": 1}, "did you mean 'rayleigh'"),
    ({"model": "rayleigh"}, "missing key 'rate'"),
    ({"model": "rayleigh", "rate": 0}, "must be above 0"),
    ({"model": "rayleigh", "rate": 500}, "0.001..100 Hz"),
    ({"model": "rician", "rate": 1}, "missing key 'k_db'"),
    ({"model": "rician", "rate": 1, "k_db": 6, "kfactor": 2}, "unknown key 'kfactor'"),
    ({"model": "two_path", "rate": 1}, "missing key 'delay_s'"),
    ({"model": "two_path", "rate": 1, "delay_s": "50ms"}, "above 20 ms"),
    ({"model": "two_path", "rate": 1, "delay_s": "1ms", "k_db": 3}, "only when second"),
])
def test_bad_fading_tables(table, match):
    with pytest.raises(ParameterError, match=match):
        parse_fading(table, "s.toml: station 'A': fading")
