"""Capture files in and out: readers as block iterators, capture writers, audio writer.

- :func:`open_capture` WAV/RF64/W64 (soundfile), SigMF pairs, headerless raw files
- :class:`CaptureInfo` the metadata every reader gives
- :func:`open_writer` SigMF or WAV capture writer (atomic, deterministic)
- :class:`AudioWriter` receiver audio to WAV (PCM_16 or float; RF64 over 4 GiB)
"""

from .audio import AudioWriter
from .base import CaptureReader
from .datatypes import KNOWN_DATATYPES, Datatype, parse_datatype
from .meta import CaptureInfo
from .reader import open_capture
from .writers import open_writer

__all__ = [
    "AudioWriter",
    "CaptureInfo",
    "CaptureReader",
    "Datatype",
    "KNOWN_DATATYPES",
    "open_capture",
    "open_writer",
    "parse_datatype",
]
