"""Seeded unit bootstrap as matrix products: resample multiplicities (resamples x units) times per-unit columns."""

from __future__ import annotations

import warnings
from collections.abc import Iterator, Sequence

import numpy as np
import scipy.sparse as sp
from threadpoolctl import threadpool_limits

CHUNK = 64  # resamples per block; fixed so that a seed gives the same draws whatever the data size


def one_blas_thread():
    """Context: run BLAS on one thread. These thin products are memory-bound, and threaded BLAS can slow
    them a hundredfold when the cores are busy (measured in bench/bench_agreement.py)."""
    return threadpool_limits(limits=1, user_api="blas")


def resample_weights(n_units: int, n_resamples: int, random_state: int | None) -> Iterator[np.ndarray]:
    """Yield blocks (resamples x units, float32) of how often each unit is drawn with replacement."""
    rng = np.random.default_rng(random_state)
    for start in range(0, n_resamples, CHUNK):
        size = min(CHUNK, n_resamples - start)
        draws = rng.integers(0, n_units, size=(size, n_units))
        draws += (np.arange(size) * n_units)[:, None]
        yield np.bincount(draws.ravel(), minlength=size * n_units).reshape(size, n_units).astype(np.float32)


def bootstrap_totals(columns: Sequence, n_resamples: int, random_state: int | None) -> list[np.ndarray]:
    """Column sums (resamples x columns, float64) of each per-unit matrix over the same unit resamples.

    Every matrix (dense or scipy.sparse) has one row per unit; sharing the resamples keeps them joint.
    """
    n_units = columns[0].shape[0]
    out: list[list[np.ndarray]] = [[] for _ in columns]
    with one_blas_thread():
        for weights in resample_weights(n_units, n_resamples, random_state):
            for store, matrix in zip(out, columns):
                if sp.issparse(matrix):
                    store.append(np.asarray((matrix.T @ weights.T).T, dtype=np.float64))
                else:
                    store.append((weights @ matrix).astype(np.float64))
    return [np.vstack(parts) for parts in out]


def percentile_interval(samples: np.ndarray, confidence: float = 0.95, min_defined: float = 0.5) -> tuple[np.ndarray, np.ndarray]:
    """Percentile interval over the first axis, ignoring undefined (NaN) resamples.

    Where fewer than `min_defined` of the resamples are defined the interval is NaN (undefined).
    """
    samples = np.asarray(samples, dtype=float)
    defined = (~np.isnan(samples)).mean(axis=0)
    tail = (1.0 - confidence) / 2.0 * 100.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        low, high = np.nanpercentile(samples, [tail, 100.0 - tail], axis=0)
    ok = defined >= min_defined
    return np.where(ok, low, np.nan), np.where(ok, high, np.nan)
