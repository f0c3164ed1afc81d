"""The band benchmark's capture: a carrier on every 10 kHz channel from 540 to 1700 kHz (117 stations).

2.4 MS/s ci16_le I/Q centred at 1.2 MHz. Each invented station is a carrier
of -40 to -55 dBFS with 50 % tone modulation; every spectral line is a
multiple of 10 Hz, so the noiseless signal repeats every 0.1 s and is made
once by an inverse FFT of one period; fresh white noise (-130 dBFS/Hz) is
added to every period. Made in seconds (the scenario synthesizer would take
minutes for 117 stations), written with sdrx's own SigMF writer.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

FS = 2.4e6
CENTER = 1.2e6
PERIOD = 240000          # 0.1 s: every line is a multiple of 10 Hz
CHANNELS = np.arange(540e3, 1700e3 + 1, 10e3)


def make(path: Path, seconds: float, seed: int = 11) -> list:
    """Write the capture; return the station frequencies (Hz)."""
    from sdrx.capture import open_writer

    rng = np.random.default_rng(seed)
    spec = np.zeros(PERIOD, complex)
    bin_hz = FS / PERIOD
    for f in CHANNELS:
        a = 10 ** (rng.uniform(-55, -40) / 20)
        fm = 10.0 * rng.integers(30, 300)        # 300 Hz .. 3 kHz, on the 10 Hz grid
        ph = rng.uniform(0, 2 * np.pi, 3)
        for df, amp, p in ((0.0, a, ph[0]), (fm, a * 0.25, ph[1]), (-fm, a * 0.25, ph[2])):
            k = int(round((f - CENTER + df) / bin_hz)) % PERIOD
            spec[k] += amp * PERIOD * np.exp(1j * p)
    period = np.fft.ifft(spec)
    sigma = np.sqrt(10 ** (-130 / 10) * FS / 2)
    n_periods = int(round(seconds * FS / PERIOD))
    with open_writer(path, fs=FS, kind="iq", datatype="ci16_le", center_hz=CENTER, force=True) as w:
        for _ in range(n_periods):
            noise = sigma * (rng.standard_normal(PERIOD) + 1j * rng.standard_normal(PERIOD))
            w.write((period + noise).astype(np.complex64))
    return [float(f) for f in CHANNELS]


if __name__ == "__main__":
    make(Path(sys.argv[1]), float(sys.argv[2]))
