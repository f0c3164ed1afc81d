"""A small band capture for the band tests, made by sdrx's own synthesizer (invented stations).

480 kS/s ci16_le I/Q centred at 1 MHz, 10 s: four stations on the 10 kHz
grid with speech (one with Rayleigh fading), music and a tone programme, at
levels from -20 to -50 dBFS. Ten seconds hold three 4 s segments with the
medium chain's 4.1 s overlap.
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["SCENARIO", "make_band_capture", "TUNES"]

TUNES = (850e3, 930e3, 1010e3, 1150e3)

SCENARIO = {
    "title": "band tests (invented stations)",
    "capture": {"kind": "iq", "rate": "480k", "center": "1M", "datatype": "ci16_le", "seconds": 10.0,
                "noise_dbfs_per_hz": -120, "seed": 5},
    "station": [
        {"name": "Lantern Point", "frequency": "850k", "level_dbfs": -25, "depth": 0.8,
         "program": {"kind": "speech"}, "fading": {"model": "rayleigh", "rate": 0.3}},
        {"name": "Gull Radio", "frequency": "930k", "level_dbfs": -40, "depth": 0.6, "program": {"kind": "music"}},
        {"name": "Tide Tone", "frequency": "1010k", "level_dbfs": -20, "depth": 0.5,
         "program": {"kind": "tone", "frequency": "1k"}},
        {"name": "Far Shoal", "frequency": "1150k", "level_dbfs": -50, "depth": 0.7, "program": {"kind": "speech"}},
    ],
}


def make_band_capture(folder: Path, name: str = "shore", seconds: float = 10.0) -> Path:
    """Synthesize the scenario into ``folder/name.sigmf-meta`` (with its truth sidecar)."""
    from sdrx.synth import parse_scenario, synthesize

    sc = dict(SCENARIO, capture=dict(SCENARIO["capture"], seconds=seconds))
    path = Path(folder) / f"{name}.sigmf-meta"
    synthesize(parse_scenario(sc), path)
    return path
