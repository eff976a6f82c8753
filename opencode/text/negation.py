"""Negation tagging: join a negation cue to the next content term of its clause ("not safe" -> not_safe).

After Das & Chen (2001) and Pang, Lee & Vaithyanathan (2002), who mark words following a negation
up to the next punctuation; here only the first content term is joined, which keeps terms readable.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from opencode.text.tokenize import negation_prefix

if TYPE_CHECKING:
    from opencode.text.analyzer import Vocabulary

_SEP, _BOUND, _TERM, _NEG, _GONE = 0, 1, 3, 5, 6  # analyzer kinds


def join_negations(kind: np.ndarray, key: np.ndarray, surf: np.ndarray, vocabulary: Vocabulary) -> None:
    """In place: each negation followed by a content term before the clause ends becomes one term."""
    neg_pos = np.flatnonzero(kind == _NEG)
    if len(neg_pos) == 0:
        return
    term_pos = np.flatnonzero(kind == _TERM)
    stops = np.append(np.flatnonzero((kind == _SEP) | (kind == _BOUND)), len(kind))
    nxt = np.searchsorted(term_pos, neg_pos, side="right")
    has_term = nxt < len(term_pos)
    neg_pos, nxt = neg_pos[has_term], nxt[has_term]
    target = term_pos[nxt]
    nb = np.searchsorted(stops, neg_pos, side="right")
    ok = target < stops[nb]
    neg_pos, target = neg_pos[ok], target[ok]
    if len(neg_pos) == 0:
        return
    # When two cues precede the same term ("not never safe") the one nearest the term wins.
    last = np.ones(len(target), bool)
    last[:-1] = target[1:] != target[:-1]
    kind[neg_pos] = _GONE
    neg_pos, target = neg_pos[last], target[last]
    pair = np.stack([key[neg_pos], key[target], surf[neg_pos], surf[target]], axis=1)
    uniq, inverse = np.unique(pair, axis=0, return_inverse=True)
    names, forms = vocabulary.key_names, vocabulary.surface_names
    new_key = np.array([vocabulary.key_id(f"{negation_prefix(names[n])}_{names[t]}") for n, t, _, _ in uniq],
                       dtype=np.int64)
    new_surf = np.array([vocabulary.surface_id(f"{forms[a]} {forms[b]}") for _, _, a, b in uniq], dtype=np.int64)
    key[target] = new_key[inverse.ravel()]
    surf[target] = new_surf[inverse.ravel()]
