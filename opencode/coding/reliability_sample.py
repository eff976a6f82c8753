"""Draw the reliability sample: verbatims for blind double coding, simple random or stratified, seeded."""

from __future__ import annotations

import math
from collections.abc import Hashable, Sequence

import numpy as np

from opencode.errors import OpenCodeError

MISSING_STRATUM = "(missing)"


def sample_size(population: int, n: int | None = None, percent: float | None = None) -> int:
    """How many to draw: exactly one of `n` (a count) or `percent` (0 < percent <= 100, rounded half up)."""
    if (n is None) == (percent is None):
        raise OpenCodeError("reliability sample: give either a number of verbatims or a percentage, not both or neither")
    if n is not None:
        if isinstance(n, bool) or int(n) != n or n < 1:
            raise OpenCodeError(f"reliability sample: the number of verbatims must be a whole number of 1 or more, got {n}")
        if n > population:
            raise OpenCodeError(f"reliability sample: asked for {n} verbatims but only {population} are available")
        return int(n)
    if not 0 < percent <= 100:
        raise OpenCodeError(f"reliability sample: the percentage must be above 0 and at most 100, got {percent}")
    return max(1, math.floor(population * percent / 100 + 0.5))


def proportional_allocation(stratum_sizes: Sequence[int], n: int) -> np.ndarray:
    """Split n over strata in proportion to their sizes (Cochran: n_h = n N_h / N), largest remainders first."""
    sizes = np.asarray(stratum_sizes, dtype=np.int64)
    exact = n * sizes / sizes.sum()
    quota = np.floor(exact).astype(np.int64)
    short = n - int(quota.sum())
    order = np.argsort(-(exact - quota), kind="stable")
    quota[order[:short]] += 1
    return quota


def _stratum_keys(strata: Sequence) -> np.ndarray:
    """Stratum codes per id; missing values (None, NaN) form their own stratum."""
    import pandas as pd  # imported here so the desk starts without pandas
    values = pd.Series(list(strata), dtype=object)
    values = values.where(values.notna(), MISSING_STRATUM)
    codes, _ = pd.factorize(values, sort=False)
    return codes


def draw_reliability_sample(
    ids: Sequence[Hashable],
    *,
    n: int | None = None,
    percent: float | None = None,
    strata: Sequence | None = None,
    random_state: int | None = 0,
) -> list:
    """Verbatim ids for double coding, in their input order: simple random, or stratified by `strata`.

    `strata` gives each id's value of a closed-ended variable; the sample is then allocated to its values
    in proportion to their sizes and drawn at random within each. The same seed gives the same sample.
    """
    ids = list(ids)
    if not ids:
        raise OpenCodeError("reliability sample: there are no verbatims to draw from")
    if len(set(ids)) != len(ids):
        import pandas as pd  # imported here so the desk starts without pandas
        duplicate = pd.Series(ids, dtype=object)
        first = duplicate[duplicate.duplicated()].iloc[0]
        raise OpenCodeError(f"reliability sample: verbatim id {first!r} appears more than once")
    size = sample_size(len(ids), n, percent)
    rng = np.random.default_rng(random_state)
    if strata is None:
        chosen = rng.choice(len(ids), size=size, replace=False)
    else:
        if len(strata) != len(ids):
            raise OpenCodeError(
                f"reliability sample: {len(strata)} stratum values for {len(ids)} verbatims; give one value per verbatim"
            )
        keys = _stratum_keys(strata)
        members = [np.flatnonzero(keys == h) for h in range(keys.max() + 1)]
        quota = proportional_allocation([m.size for m in members], size)
        chosen = np.concatenate([rng.choice(m, size=q, replace=False) for m, q in zip(members, quota)])
    return [ids[i] for i in np.sort(chosen)]
