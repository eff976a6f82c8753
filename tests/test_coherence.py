"""UMass and NPMI coherence checked by hand on a tiny corpus.

Formulas: UMass, Mimno et al. (2011) EMNLP, pairs (v_m, v_l), l < m: log((D(v_m, v_l) + 1) / D(v_l));
NPMI, Bouma (2009), as topic coherence in Lau, Newman & Baldwin (2014) EACL:
log(P(i,j) / (P(i) P(j))) / -log P(i,j). Both averaged over the term pairs (our convention, see coherence.py).
"""

import math

import numpy as np
import pytest
import scipy.sparse as sp

from opencode.analysis.themes.coherence import npmi_coherence, top_term_indices, umass_coherence

# Toy corpus, terms a b c d (columns 0..3); a count of 2 still means "occurs" (document counting):
#   d1: a b      d2: a a b c      d3: a      d4: c d
# Hand counts over N = 4 documents: D(a)=3, D(b)=2, D(c)=2, D(d)=1; D(a,b)=2, D(a,c)=1, D(b,c)=1, D(a,d)=0.
TOY = sp.csr_matrix(np.array([
    [1, 1, 0, 0],
    [2, 1, 1, 0],
    [1, 0, 0, 0],
    [0, 0, 1, 1],
]))


def test_umass_by_hand():
    # Theme [a, b, c] in weight order; pairs (m, l):
    #   (b, a): log((2 + 1) / D(a)=3) = log(1)   = 0
    #   (c, a): log((1 + 1) / 3)      = log(2/3) = -0.405465
    #   (c, b): log((1 + 1) / D(b)=2) = log(1)   = 0
    # mean over 3 pairs = -0.135155
    # Theme [c, b, a]: (b, c): log(2/2)=0; (a, c): log(2/2)=0; (a, b): log(3/2)=0.405465 -> mean 0.135155,
    # so the order matters (the earlier, heavier term is the conditioning one).
    top = np.array([[0, 1, 2], [2, 1, 0]])
    np.testing.assert_allclose(umass_coherence(TOY, top), [math.log(2 / 3) / 3, math.log(3 / 2) / 3])
    np.testing.assert_allclose(umass_coherence(TOY, top), [-0.135155, 0.135155], atol=1e-6)


def test_npmi_by_hand():
    # Theme [a, b, c]:
    #   (a, b): P=2/4, P(a)P(b)=3/4*2/4=0.375 -> log(0.5/0.375)=0.287682 / -log(0.5)=0.693147 -> 0.415037
    #   (a, c): P=1/4, P(a)P(c)=0.375 -> log(0.25/0.375)=-0.405465 / -log(0.25)=1.386294 -> -0.292481
    #   (b, c): P=1/4, P(b)P(c)=0.25 -> log(1)=0 -> 0
    # mean = (0.415037 - 0.292481 + 0) / 3 = 0.040852
    # Theme [a, d]: never together -> NPMI = -1 (the limit as P(i,j) -> 0).
    top = np.array([[0, 1, 2]])
    np.testing.assert_allclose(npmi_coherence(TOY, top), [0.040852], atol=1e-6)
    np.testing.assert_allclose(npmi_coherence(TOY, np.array([[0, 3]])), [-1.0])


def test_npmi_is_one_when_terms_always_co_occur():
    # Two terms present in every document: P(i,j) = P(i) = P(j) = 1 -> perfect association, NPMI = +1.
    always = sp.csr_matrix(np.ones((3, 2)))
    np.testing.assert_allclose(npmi_coherence(always, np.array([[0, 1]])), [1.0])


def test_top_term_indices_heaviest_first():
    components = np.array([[0.1, 0.5, 0.3, 0.0], [0.9, 0.0, 0.2, 0.4]])
    assert top_term_indices(components, 3).tolist() == [[1, 2, 0], [0, 3, 2]]
    assert top_term_indices(components, 10).shape == (2, 4)


@pytest.mark.parametrize("measure", [umass_coherence, npmi_coherence])
def test_vectorised_matches_pair_loop(measure):
    # The vectorised version (X_bin.T @ X_bin on the top-term columns) against a direct loop over pairs.
    rng = np.random.default_rng(3)
    counts = sp.csr_matrix(rng.poisson(0.4, size=(60, 12)))
    top = np.array([rng.permutation(12)[:5] for _ in range(4)])
    occurs = counts.toarray() > 0
    n = occurs.shape[0]
    expected = []
    for row in top:
        scores = []
        for m in range(len(row)):
            for l in range(m):
                both = (occurs[:, row[m]] & occurs[:, row[l]]).sum()
                if measure is umass_coherence:
                    scores.append(math.log((both + 1) / max(occurs[:, row[l]].sum(), 1)))
                elif both == 0:
                    scores.append(-1.0)
                else:
                    p_ij, p_i, p_j = both / n, occurs[:, row[m]].sum() / n, occurs[:, row[l]].sum() / n
                    scores.append(1.0 if p_ij == 1 else math.log(p_ij / (p_i * p_j)) / -math.log(p_ij))
        expected.append(np.mean(scores))
    np.testing.assert_allclose(measure(counts, top), expected)
