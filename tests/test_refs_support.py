"""Shared by the stored-reference tests: a small AM capture made in code, and a test chain."""

from __future__ import annotations

from pathlib import Path

TUNE = 1.01e6
SECONDS = 0.3

CHAIN = """\
name = "bench-two"
description = "test chain for stored references"
if_frequency = "455k"
injection = "high"

[preselector]
kind = "tracking"
q = 40

[[if_stage]]
response = "butterworth"
order = 2
bandwidth = "{bw}"
gain_db = 30
agc = true

[[if_stage]]
response = "single_tuned"
q = 60
gain_db = 20

[audio]
rate = 16000
lowpass = "4.5k"
"""


SCENARIO = """\
title = "refs test bench"
[capture]
kind = "iq"
rate = "96k"
center = "1.0M"
datatype = "ci16_le"
seconds = {seconds}
noise_dbfs_per_hz = -115
seed = 3

[[station]]
name = "Bench Point"
frequency = "1010k"
level_dbfs = -18
depth = 0.3               # common practice: bench test signal 1 kHz at 30 % modulation
[station.program]
kind = "tone"
frequency = "1k"

[[station]]
name = "Next Door"
frequency = "1020k"
level_dbfs = -24
depth = 0.5
[station.program]
kind = "tone"
frequency = "400"
"""


def make_capture(path, *, seed=7):
    """A SigMF I/Q capture made by sdrx.synth (deterministic for a seed), with its truth sidecar."""
    from sdrx.synth import synthesize

    path = Path(path)
    scenario = path.with_name("bench-scenario.toml")
    scenario.write_text(SCENARIO.format(seconds=SECONDS))
    synthesize(scenario, path, seed=seed, force=True)
    return path
