"""Blind A/B/X trials: which outputs each trial presents, the hidden key, chance.

In each trial the listener hears A and B (named) and X, which is one of them,
drawn at random; the listener says whether X is A or B. Scoring k of n right
by guessing has probability P(K ≥ k) for K ~ Binomial(n, 1/2).
"""

from __future__ import annotations

import base64
import itertools
import json
from dataclasses import dataclass

import numpy as np

from ..errors import ParameterError

__all__ = ["MAX_TRIALS", "BlindPlan", "plan_trials", "fresh_seed", "chance_table", "encode_key", "decode_key"]

#: more trials than anyone sits through; keeps the page small
MAX_TRIALS = 200


@dataclass(frozen=True)
class BlindPlan:
    """Trials of an A/B/X test.

    Attributes
    ----------
    seed : int
        Seed of the numpy Generator that drew X.
    pairs : tuple of (int, int)
        Per trial, the indices of the outputs presented as A and as B.
    x_is : tuple of str
        Per trial, ``"A"`` or ``"B"``: the key.
    """

    seed: int
    pairs: tuple
    x_is: tuple

    @property
    def n(self) -> int:
        """Number of trials."""
        return len(self.pairs)

    def public_trials(self, labels) -> list:
        """Trials without the key: ``[{"trial", "a", "b"}]`` (1-based trial number)."""
        return [{"trial": t + 1, "a": labels[a], "b": labels[b]} for t, (a, b) in enumerate(self.pairs)]

    def key(self, labels) -> dict:
        """The key as written to the key file."""
        return {
            "seed": self.seed,
            "trials": [
                {"trial": t + 1, "a": labels[a], "b": labels[b], "x_is": x,
                 "x": labels[a] if x == "A" else labels[b]}
                for t, ((a, b), x) in enumerate(zip(self.pairs, self.x_is))
            ],
        }


def fresh_seed() -> int:
    """A seed from the operating system's entropy (used when ``--seed`` is not given)."""
    return int(np.random.SeedSequence().entropy % (2**63))


def plan_trials(n_trials: int, n_outputs: int, seed: int) -> BlindPlan:
    """Draw the trials of an A/B/X test, reproducibly from ``seed``.

    Parameters
    ----------
    n_trials : int
        Number of trials (0 for none).
    n_outputs : int
        Number of outputs compared (at least 2).
    seed : int
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    BlindPlan

    Raises
    ------
    ParameterError
        If ``n_trials`` is negative or above :data:`MAX_TRIALS`, or the seed is negative.

    Notes
    -----
    Trial t presents the pair ``combinations(range(n_outputs), 2)[t mod P]`` (all
    pairs in turn, P = n(n−1)/2); X is A when ``rng.integers(0, 2)`` gives 0.
    A is always the earlier output on the command line.

    Examples
    --------
    >>> p = plan_trials(4, 2, seed=7)
    >>> p.pairs
    ((0, 1), (0, 1), (0, 1), (0, 1))
    >>> p.x_is == plan_trials(4, 2, seed=7).x_is
    True
    """
    if not isinstance(n_trials, (int, np.integer)) or isinstance(n_trials, bool) or n_trials < 0 or n_trials > MAX_TRIALS:
        raise ParameterError(f"--blind: {n_trials!r} trials; give a whole number from 0 to {MAX_TRIALS}")
    if seed < 0:
        raise ParameterError(f"--seed: {seed!r} is negative; give a whole number >= 0")
    all_pairs = list(itertools.combinations(range(n_outputs), 2))
    rng = np.random.default_rng(seed)
    draws = rng.integers(0, 2, size=n_trials)
    pairs = tuple(all_pairs[t % len(all_pairs)] for t in range(n_trials))
    return BlindPlan(int(seed), pairs, tuple("A" if d == 0 else "B" for d in draws))


def chance_table(n_trials: int) -> list:
    """P(K ≥ k) for K ~ Binomial(n_trials, 1/2), for k = 0 … n_trials.

    Notes
    -----
    ``P(K ≥ k) = binom.sf(k − 1, n, 0.5)`` (scipy.stats): the probability of
    scoring at least k right by guessing.

    Examples
    --------
    >>> chance_table(3)
    [1.0, 0.875, 0.5, 0.125]
    """
    from scipy.stats import binom

    return [float(binom.sf(k - 1, n_trials, 0.5)) for k in range(n_trials + 1)]


def encode_key(x_is, salt: bytes) -> str:
    """Obfuscate the key for the page: base64 of (JSON bytes XOR repeated salt).

    This only keeps the key out of sight (not in the page's text nor readable in
    its source); it is not secret from someone who decodes it on purpose.

    Examples
    --------
    >>> s = encode_key(["A", "B"], b"\\x01\\x02")
    >>> decode_key(s, b"\\x01\\x02")
    ['A', 'B']
    """
    if not salt:
        raise ParameterError("blind key salt: must not be empty")
    plain = json.dumps(list(x_is), separators=(",", ":")).encode("ascii")
    mixed = bytes(b ^ salt[i % len(salt)] for i, b in enumerate(plain))
    return base64.b64encode(mixed).decode("ascii")


def decode_key(encoded: str, salt: bytes) -> list:
    """Inverse of :func:`encode_key` (what the page does when the key is revealed)."""
    mixed = base64.b64decode(encoded)
    plain = bytes(b ^ salt[i % len(salt)] for i, b in enumerate(mixed))
    return json.loads(plain.decode("ascii"))
