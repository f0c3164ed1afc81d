"""The programme scorer itself (tests/helpers_score.py), against cases whose SNR is known exactly."""

import math

import numpy as np
import pytest
from scipy import signal

from helpers_score import programme_from_truth, programme_snr_db

FS = 48000.0


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


@pytest.fixture
def programme(rng):
    # band-limited noise as a stand-in programme (4.5 kHz, as broadcast audio)
    return signal.sosfilt(signal.butter(8, 4500.0, fs=FS, output="sos"), rng.standard_normal(int(4 * FS)))


def _chain(p):
    """A linear chain: delay, 80 Hz high-pass and 4.5 kHz low-pass (an AM receiver's audio band)."""
    sos = np.vstack([signal.butter(2, 80.0, "highpass", fs=FS, output="sos"),
                     signal.butter(4, 4500.0, fs=FS, output="sos")])
    return signal.sosfilt(sos, np.concatenate([np.zeros(90), p]))[:len(p)]


def test_linear_chain_is_not_an_error(programme):
    # the chain's intended response is absorbed by the equalizer: the score is limited only by numerics
    assert programme_snr_db(_chain(programme), programme, FS) > 70.0


def test_added_noise_scores_its_own_snr(programme, rng):
    y = _chain(programme)
    k = int(0.5 * FS)
    noise = rng.standard_normal(len(y))
    noise *= np.sqrt(np.mean(y[k:] ** 2) / np.mean(noise[k:] ** 2)) * 10 ** (-40 / 20)
    # the fit takes up a share taps/N of the noise (about 1 % here): 0.05 dB
    assert programme_snr_db(y + noise, programme, FS) == pytest.approx(40.0, abs=0.1)


def test_gain_riding_the_modulation_is_an_error(programme):
    # y·(1 + ε·sin ωt): the gain term carries power ε²/2 of the signal, SNR = −10·log10(ε²/2)
    # (a physical identity of amplitude modulation: each of the two side terms has (ε/2)²)
    eps = 0.05
    y = _chain(programme)
    t = np.arange(len(y)) / FS
    expected = -10 * math.log10(eps ** 2 / 2)
    assert programme_snr_db(y * (1 + eps * np.sin(2 * np.pi * 3.0 * t)), programme, FS) == pytest.approx(
        expected, abs=0.1)


def test_programme_from_truth_regenerates_the_sidecar_programme():
    truth = {"stations": [{"name": "A", "program": {"kind": "tone", "frequency": 1000.0},
                           "program_fs": 16000.0, "program_seed": 1}]}
    p = programme_from_truth(truth, "A", FS, 0.25, 0.5)
    t = 0.25 + np.arange(len(p)) / FS
    assert len(p) == int(0.5 * FS)
    np.testing.assert_allclose(p, np.cos(2 * np.pi * 1000.0 * t), atol=2e-3)
