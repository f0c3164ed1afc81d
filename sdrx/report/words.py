"""Stage descriptions in the words a reader uses, for every figure and table of the report.

The chain's files say ``single_tuned`` or ``butterworth`` with a prototype
``order``; a reader says "single tuned circuit" or "Butterworth band-pass,
2 resonators (4 poles)". :func:`stage_words` is the one mapping, used by the
legends (:func:`stage_labels`) and by the Q table of the page; report.json
keeps the config words.
"""

from __future__ import annotations

__all__ = ["stage_words", "preselector_words", "stage_labels", "short_name", "NAME_CHARS"]

#: A chain's name in a figure's title is cut to this many characters (the page prints it whole).
NAME_CHARS = 60

_NAMES = {"butterworth": "Butterworth", "chebyshev": "Chebyshev", "bessel": "Bessel", "elliptic": "elliptic"}


def stage_words(response: str, order: int) -> str:
    """A stage's filter in plain words.

    Parameters
    ----------
    response : str
        ``single_tuned``, ``double_tuned``, ``butterworth``, ``chebyshev``,
        ``bessel`` or ``elliptic``.
    order : int
        Prototype order (ignored for the tuned circuits).

    Returns
    -------
    str

    Notes
    -----
    A band-pass made from an order-n low-pass prototype has 2n poles; an
    all-pole prototype (Butterworth, Chebyshev, Bessel) is built as a ladder
    of n coupled resonators, each element of the prototype becoming one
    resonator (A. I. Zverev, Handbook of Filter Synthesis, Wiley 1967, ch. 2;
    from memory). An elliptic ladder has traps besides, so only its order and
    poles are given. A double-tuned stage is two coupled tuned circuits (four
    poles).

    Examples
    --------
    >>> stage_words("double_tuned", 1)
    'double-tuned pair (two resonators)'
    >>> stage_words("butterworth", 2)
    'Butterworth band-pass, 2 resonators (4 poles)'
    >>> stage_words("elliptic", 4)
    'elliptic band-pass, order 4 (8 poles)'
    """
    if response == "single_tuned":
        return "single tuned circuit"
    if response == "double_tuned":
        return "double-tuned pair (two resonators)"
    name = _NAMES.get(response, response)
    if response == "elliptic":
        return f"{name} band-pass, order {order} ({2 * order} poles)"
    return f"{name} band-pass, {order} resonator{'s' if order != 1 else ''} ({2 * order} poles)"


def preselector_words(kind: str, order: int = 2) -> str:
    """The preselector (RF selectivity) in plain words; ``kind`` as in the chain's ``[preselector]``.

    Examples
    --------
    >>> preselector_words("tracking")
    'single tuned circuit tracking the tune'
    >>> preselector_words("lowpass", 3)
    'Butterworth low-pass, 3 poles'
    """
    if kind == "tracking":
        return "single tuned circuit tracking the tune"
    if kind == "lowpass":
        return f"Butterworth low-pass, {order} pole{'s' if order != 1 else ''}"
    if kind == "bandpass":
        return stage_words("butterworth", order)
    return "none"


def stage_labels(design) -> list:
    """Legend labels of each stage in the order of ``sdrx.analysis.selectivity.stage_responses_db``.

    The preselector first (when it has a response), then ``IF stage i: ...``.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> stage_labels(design_chain("wide"))[2]
    'IF stage 2: double-tuned pair (two resonators)'
    """
    out = []
    pre = design.preselector
    if pre.kind != "none":
        out.append(f"preselector: {preselector_words(pre.kind, pre.order)}")
    for i, st in enumerate(design.stages, 1):
        out.append(f"IF stage {i}: {stage_words(st.response, st.order)}")
    return out


def short_name(name: str, limit: int = NAME_CHARS) -> str:
    """A chain's name for a figure title: whole up to ``limit`` characters, else cut with "…".

    Examples
    --------
    >>> short_name("medium")
    'medium'
    >>> short_name("x" * 100, 10)
    'xxxxxxxxx…'
    """
    name = " ".join(str(name).split())
    return name if len(name) <= limit else name[:limit - 1].rstrip() + "…"
