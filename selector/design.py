"""One design representation with named slots: a front and a rear drive unit and one tyre size.

Each drive unit is a motor and a reducer (or gearbox), or empty. Single-axle studies fill only
their driven axle's unit. `Design` carries the objective value and the catalogue row positions;
`DesignIds` the same design as part ids (what users read and write).
"""

from __future__ import annotations

from dataclasses import dataclass

from selector.engine.parts import AXLE_COLUMNS, FM, FR, RM, RR, TY

AXLES = ("front", "rear")


@dataclass(frozen=True)
class Design:
    """A design found by a search: objective value and catalogue positions of its parts.

    ``key`` = (front motor, front reducer, rear motor, rear reducer, tyre), -1 for an empty slot.
    Designs order by value, then by ``key`` (part-id order), which is the tie-break rule.

    For scripts written against the single-axle view, a single-unit design also reads as the
    sequence (value, motor, reducer, tyre) (``d[0]``, ``d[1:]``, unpacking).
    """

    value: float
    key: tuple

    @classmethod
    def of(cls, value, row) -> "Design":
        """A design from a value and a key row (any integer sequence of length 5)."""
        return cls(float(value), tuple(int(x) for x in row))

    def unit(self, axle: str) -> tuple[int, int] | None:
        """(motor, reducer) positions of the unit on ``axle`` ("front" or "rear"), or None."""
        m, r = AXLE_COLUMNS[axle]
        return None if self.key[m] < 0 else (self.key[m], self.key[r])

    @property
    def front(self) -> tuple[int, int] | None:
        """(motor, reducer) of the front unit, or None."""
        return self.unit("front")

    @property
    def rear(self) -> tuple[int, int] | None:
        """(motor, reducer) of the rear unit, or None."""
        return self.unit("rear")

    @property
    def tyre(self) -> int:
        """Tyre position."""
        return self.key[TY]

    @property
    def units(self) -> list[tuple[str, int, int]]:
        """[(axle, motor, reducer)] of the present units, front first."""
        return [(a, *self.unit(a)) for a in AXLES if self.unit(a) is not None]

    @property
    def two_units(self) -> bool:
        """True when both axles carry a unit."""
        return self.key[FM] >= 0 and self.key[RM] >= 0

    # ------------------------------------------------------------------ single-axle sequence view
    def _legacy(self) -> tuple:
        if self.two_units:
            raise TypeError("a two-unit design has no (value, motor, reducer, tyre) view; use .front, .rear, .tyre")
        m, r = (self.key[FM], self.key[FR]) if self.key[FM] >= 0 else (self.key[RM], self.key[RR])
        return (self.value, m, r, self.key[TY])

    def __getitem__(self, i):
        return self._legacy()[i]

    def __iter__(self):
        return iter(self._legacy())

    def __len__(self) -> int:
        return 4
