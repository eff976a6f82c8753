"""The units x coders x codes boolean array that every agreement statistic reads, built from assignments."""

from __future__ import annotations

from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError


def _index(values: Sequence) -> pd.Index:
    """Distinct values in sorted order when they sort, else in order of first appearance."""
    uniques = pd.unique(pd.Series(list(values), dtype=object))
    try:
        return pd.Index(sorted(uniques), dtype=object)
    except TypeError:
        return pd.Index(uniques, dtype=object)


@dataclass(frozen=True, eq=False)
class CodingMatrix:
    """Who coded what for one question: `present[u, r, c]` = coder r gave code c to unit u.

    `coded[u, r]` says coder r coded unit u (possibly with no code at all); a cell with coded False is
    missing, not "no code". Coders are plain names: a machine coder is one more column like any other.
    """

    units: tuple
    coders: tuple[str, ...]
    codes: tuple
    present: np.ndarray
    coded: np.ndarray

    def __post_init__(self) -> None:
        present = np.asarray(self.present, dtype=bool)
        coded = np.asarray(self.coded, dtype=bool)
        object.__setattr__(self, "present", present)
        object.__setattr__(self, "coded", coded)
        shape = (len(self.units), len(self.coders), len(self.codes))
        if present.shape != shape or coded.shape != shape[:2]:
            raise OpenCodeError(
                f"agreement data: codes array has shape {present.shape} and coded mask {coded.shape}, "
                f"expected {shape} and {shape[:2]} for {shape[0]} verbatims, {shape[1]} coders, {shape[2]} codes"
            )
        if len(set(self.coders)) != len(self.coders):
            raise OpenCodeError(f"agreement data: a coder name appears twice in {', '.join(map(str, self.coders))}")
        if len(self.coders) < 2:
            named = ", ".join(map(str, self.coders)) or "none"
            raise OpenCodeError(f"agreement needs at least 2 coders; got {len(self.coders)} ({named})")
        stray = present & ~coded[:, :, None]
        if stray.any():
            u, r, c = np.argwhere(stray)[0]
            raise OpenCodeError(
                f"agreement data: coder {self.coders[r]!r} has code {self.codes[c]!r} on verbatim "
                f"{self.units[u]!r} but is not marked as having coded it"
            )
        for r, coder in enumerate(self.coders):
            if not coded[:, r].any():
                raise OpenCodeError(f"coder {coder!r} has coded no verbatims for this question")
            if not present[:, r, :].any():
                raise OpenCodeError(
                    f"coder {coder!r} gave no codes at all on the {int(coded[:, r].sum())} verbatims they coded"
                )

    @classmethod
    def from_assignments(
        cls,
        assignments: Iterable[tuple[Hashable, str, Hashable]],
        coded: Mapping[str, Iterable[Hashable]] | None = None,
        *,
        coders: Sequence[str] | None = None,
        codes: Sequence[Hashable] | None = None,
    ) -> "CodingMatrix":
        """Build from (unit, coder, code) assignments plus each coder's set of coded units.

        `coders` picks and orders the coders compared (others' assignments are ignored; default: every
        coder seen). `codes` is the code frame (default: the codes used); a code outside it is an error.
        A unit a coder assigned a code to counts as coded by that coder even if missing from `coded`.
        """
        rows = list(assignments)
        coded = dict(coded or {})
        seen = [coder for _, coder, _ in rows] + list(coded)
        chosen = tuple(coders) if coders is not None else tuple(_index(seen))
        wanted = set(chosen)
        rows = [row for row in rows if row[1] in wanted]
        code_index = _index([code for _, _, code in rows]) if codes is None else pd.Index(list(codes), dtype=object)
        if not code_index.is_unique:
            raise OpenCodeError("agreement data: the code frame lists a code twice")
        cells = [(unit, coder) for coder in chosen for unit in coded.get(coder, ())]
        unit_index = _index([unit for unit, _ in cells] + [unit for unit, _, _ in rows])
        coder_pos = {coder: r for r, coder in enumerate(chosen)}
        present = np.zeros((len(unit_index), len(chosen), len(code_index)), dtype=bool)
        mask = np.zeros((len(unit_index), len(chosen)), dtype=bool)
        if cells:
            mask[unit_index.get_indexer([u for u, _ in cells]), [coder_pos[c] for _, c in cells]] = True
        if rows:
            code_pos = code_index.get_indexer([code for _, _, code in rows])
            if (code_pos < 0).any():
                unit, coder, code = rows[int(np.argmax(code_pos < 0))]
                raise OpenCodeError(
                    f"coder {coder!r} gave code {code!r} to verbatim {unit!r}, but the code frame has no code {code!r}"
                )
            unit_pos = unit_index.get_indexer([unit for unit, _, _ in rows])
            coder_rows = [coder_pos[coder] for _, coder, _ in rows]
            present[unit_pos, coder_rows, code_pos] = True
            mask[unit_pos, coder_rows] = True
        return cls(tuple(unit_index), chosen, tuple(code_index), present, mask)

    @property
    def coders_per_unit(self) -> np.ndarray:
        """How many of the coders coded each unit."""
        return self.coded.sum(axis=1)

    @property
    def pairable(self) -> np.ndarray:
        """Units coded by two or more coders: the only ones that carry information about agreement."""
        return self.coders_per_unit >= 2
