"""What a case asks of the design verdict, in SI: requirements, input uncertainty, a design
limit and a sweep. ``schemas.design_rules`` builds it from the case document; the design runner
(:mod:`worker.engine.design.runner`) answers it."""

from __future__ import annotations

from dataclasses import dataclass, field

from worker.engine.design.paths import FieldRef
from worker.engine.design.requirements import Requirement


@dataclass(frozen=True)
class UncertainInput:
    """One uncertain input in SI: ``distribution`` and its parameters (``sd`` absolute; a case's
    ``relative_sd`` of a normal is turned into ``sd``; ``relative_sd`` of a lognormal is its
    coefficient of variation), ``nominal`` the case's value, ``domain`` its physical lower bound
    and whether that bound is open; ``unit`` the field's SI unit."""

    field: FieldRef
    distribution: str
    nominal: float
    domain: tuple[float, bool]
    sd: float | None = None
    relative_sd: float | None = None
    low: float | None = None
    mode: float | None = None
    high: float | None = None
    unit: str = "1"


@dataclass(frozen=True)
class UncertaintyRequest:
    """The case's ``uncertainty`` block in SI; ``seed`` None: one is drawn and recorded."""

    inputs: tuple[UncertainInput, ...]
    correlations: tuple[tuple[int, int, float], ...] = ()
    coverage: float = 0.95
    significant_digits: int = 2
    seed: int | None = None
    max_trials: int = 1_000_000


@dataclass(frozen=True)
class LimitRequest:
    """The case's ``design_limit``: vary ``field`` over ``low``..``high`` (SI) until the margin
    of requirement ``requirement`` is zero."""

    field: FieldRef
    requirement: str
    low: float
    high: float
    unit: str


@dataclass(frozen=True)
class SweepRequest:
    """The case's ``sweep``: a full check at each value (SI) of ``field``."""

    field: FieldRef
    values: tuple[float, ...]
    unit: str


@dataclass(frozen=True)
class DesignRequest:
    """Everything the case asks beyond the calculation itself."""

    requirements: tuple[Requirement, ...] = ()
    uncertainty: UncertaintyRequest | None = None
    limit: LimitRequest | None = None
    sweep: SweepRequest | None = None
    #: Times the requirements name (s): the run reports its series there too.
    requirement_times: tuple[float, ...] = field(default=())

    @property
    def asks_anything(self) -> bool:
        return bool(self.requirements) or self.uncertainty is not None or \
            self.limit is not None or self.sweep is not None
