"""Matching member and node ids against the ids and patterns of a case.

A case names members (loads, form-finding groups) and nodes (``[report]
deck``) by lists of ids or shell-style patterns (``"H*"``, ``"D[0-9]"``,
``"C?"``).  An id matches a list when it is equal to one of its entries, or
when it matches (:func:`fnmatch.fnmatchcase`, case-sensitive) an entry that
contains a wildcard (``*``, ``?`` or ``[``).  An entry equal to an id always
matches that id, even when the id itself contains ``[`` or ``*``.

This is the only implementation in cablefe.  Plain ids are found by a dict
lookup, and all wildcard entries of a list are joined into one regular
expression matched once per id, so matching ``P`` entries against ``N`` ids
costs O(N + P) for plain ids (a load listing every member of a big net
explicitly) instead of O(N * P).
"""
from __future__ import annotations

import fnmatch
import re
from typing import Iterable, Mapping, Sequence

import numpy as np

__all__ = ["is_pattern", "compile_patterns", "PatternIndex", "match_indices", "match_ids"]

_WILDCARD = re.compile(r"[*?\[]")


def is_pattern(text: str) -> bool:
    """Whether ``text`` contains a shell wildcard (``*``, ``?`` or ``[``)."""
    return _WILDCARD.search(text) is not None


def compile_patterns(patterns: Iterable[str]):
    """One compiled regular expression matching any of the wildcard ``patterns``.

    Returns None when no entry has a wildcard.  Each pattern is translated
    once (:func:`fnmatch.translate`), so the cost is linear in the number of
    patterns.
    """
    globs = list(dict.fromkeys(p for p in patterns if is_pattern(p)))
    if not globs:
        return None
    return re.compile("|".join(f"(?:{fnmatch.translate(p)})" for p in globs))


def _as_tuple(patterns: str | Iterable[str]) -> tuple[str, ...]:
    return (patterns,) if isinstance(patterns, str) else tuple(patterns)


class PatternIndex:
    """The ids of a model, indexed once for repeated matching.

    Parameters
    ----------
    ids : sequence of str
        All ids (members or nodes), in model order; ids are unique.
    """

    def __init__(self, ids: Sequence[str]):
        self.ids = list(ids)
        self.position: Mapping[str, int] = {name: k for k, name in enumerate(self.ids)}

    def indices(self, patterns: str | Iterable[str]) -> np.ndarray:
        """Sorted indices of the ids matching any entry of ``patterns``.

        Returns
        -------
        numpy.ndarray of int64
            Positions in ``ids``, ascending (model order), each once.
        """
        patterns = _as_tuple(patterns)
        hit = np.zeros(len(self.ids), dtype=bool)
        exact = [self.position[p] for p in patterns if p in self.position]
        hit[exact] = True
        rx = compile_patterns(patterns)
        if rx is not None:
            match = rx.match
            hit |= np.fromiter((match(name) is not None for name in self.ids), dtype=bool, count=len(self.ids))
        return np.flatnonzero(hit).astype(np.int64)

    def matches_any(self, pattern: str) -> bool:
        """Whether one entry (id or pattern) matches at least one id."""
        if pattern in self.position:
            return True
        rx = compile_patterns((pattern,))
        if rx is None:
            return False
        return any(map(rx.match, self.ids))

    def unmatched(self, patterns: str | Iterable[str]) -> list[int]:
        """Positions in ``patterns`` of the entries that match no id."""
        return [k for k, p in enumerate(_as_tuple(patterns)) if not self.matches_any(p)]


def match_indices(patterns: str | Iterable[str], ids: Sequence[str]) -> list[int]:
    """Indices (ascending) of the ``ids`` matching any entry of ``patterns``.

    For repeated matching against the same ids build a :class:`PatternIndex`
    once instead.
    """
    return PatternIndex(ids).indices(patterns).tolist()


def match_ids(patterns: str | Iterable[str], ids: Sequence[str]) -> list[str]:
    """The ``ids`` (in their order) matching any entry of ``patterns``."""
    index = PatternIndex(ids)
    return [index.ids[k] for k in index.indices(patterns)]
