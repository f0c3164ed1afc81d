"""Every station of a capture in one pass, many captures, here or on a Dask cluster (``sdrx band``).

- :mod:`~sdrx.band.choices` the station list and each station's chain, from the options
- :mod:`~sdrx.band.plan` segments with an overlap on the whole capture's grid; the settling time
- :mod:`~sdrx.band.segment` one unit of work: every station over one segment (runs on a worker)
- :mod:`~sdrx.band.levels` the per-second carrier level log
- :mod:`~sdrx.band.spectrogram` the capture's waterfall on a fixed column grid
- :mod:`~sdrx.band.figures`, :mod:`~sdrx.band.page` the overview page
- :mod:`~sdrx.band.pictures` the spectrogram pictures, drawn in a helper process beside the receiving
- :mod:`~sdrx.band.outputs` names, the folder check and the commit of the whole set
- :mod:`~sdrx.band.run` :func:`band`, the whole job
"""

from __future__ import annotations

__all__ = ["band"]


def __getattr__(name):
    # lazy, so that the picture helper's ``import sdrx.band.pictures`` does not import the receiver
    if name == "band":
        from .run import band

        return band
    raise AttributeError(f"module 'sdrx.band' has no attribute {name!r}")
