"""What a case asks of the design verdict, in SI: requirements, input uncertainty, a design
limit, a sweep, and measured data with the inputs to calibrate on them.
``schemas.design_rules`` builds it from the case document; the design runner
(:mod:`worker.engine.design.runner`) and :mod:`worker.engine.design.measured` answer it."""

from __future__ import annotations

from dataclasses import dataclass, field

from worker.engine.design.paths import FieldRef
from worker.engine.design.requirements import Requirement
from worker.engine.design.targets import Target


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


#: How a case's input uncertainty is propagated (``uncertainty.method``): the adaptive Monte
#: Carlo of JCGM 101:2008 (the default) or the law of propagation of JCGM 100:2008, 2k + 1
#: evaluations for k inputs (:mod:`~worker.engine.design.propagation_law`).
MONTE_CARLO = "monte_carlo"
LAW_OF_PROPAGATION = "law_of_propagation"
PROPAGATION_METHODS = (MONTE_CARLO, LAW_OF_PROPAGATION)


@dataclass(frozen=True)
class UncertaintyRequest:
    """The case's ``uncertainty`` block in SI; ``seed`` None: one is drawn and recorded;
    ``method`` one of :data:`PROPAGATION_METHODS` (``seed`` and ``max_trials`` serve the Monte
    Carlo only)."""

    inputs: tuple[UncertainInput, ...]
    correlations: tuple[tuple[int, int, float], ...] = ()
    coverage: float = 0.95
    significant_digits: int = 2
    seed: int | None = None
    max_trials: int = 1_000_000
    method: str = MONTE_CARLO

    @property
    def evaluations(self) -> int:
        """Model evaluations the law of propagation takes: 2k + 1 for k inputs."""
        return 2 * len(self.inputs) + 1


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
class MeasurementSet:
    """One set of measured values of a series quantity of the record (SI).

    ``quantity`` (and ``layer``/``layer_name``, ``probe``) names the figure as a requirement
    does (:class:`~worker.engine.design.targets.Target`); ``times`` (s), ``values`` and
    ``standard_uncertainty`` (the standard uncertainty of each value, u_D) in ``unit``, the SI
    unit of the quantity; ``use``: ``calibration`` (fitted) or ``validation`` (compared,
    never fitted); ``given_unit`` the unit the case wrote the values in."""

    id: str
    quantity: str
    times: tuple[float, ...]
    values: tuple[float, ...]
    standard_uncertainty: tuple[float, ...]
    use: str
    unit: str = "1"
    given_unit: str = "1"
    layer: int | None = None
    layer_name: str | None = None
    probe: int | None = None

    @property
    def for_calibration(self) -> bool:
        return self.use == "calibration"

    def targets(self) -> list[Target]:
        """The record figure of each point."""
        return [Target(self.quantity, self.layer, t, layer_name=self.layer_name,
                       probe=self.probe) for t in self.times]


@dataclass(frozen=True)
class CalibratedInput:
    """One input fitted to the calibration data: its field, bounds (SI) and fitting scale."""

    field: FieldRef
    low: float
    high: float
    log: bool
    unit: str = "1"


@dataclass(frozen=True)
class CalibrationRequest:
    """The case's ``calibration`` block: the inputs fitted to the sets marked calibration."""

    parameters: tuple[CalibratedInput, ...]


@dataclass(frozen=True)
class DesignRequest:
    """Everything the case asks beyond the calculation itself."""

    requirements: tuple[Requirement, ...] = ()
    uncertainty: UncertaintyRequest | None = None
    limit: LimitRequest | None = None
    sweep: SweepRequest | None = None
    measurements: tuple[MeasurementSet, ...] = ()
    calibration: CalibrationRequest | None = None
    #: Times the requirements and measurements name (s): the run reports its series there too.
    requirement_times: tuple[float, ...] = field(default=())

    @property
    def asks_anything(self) -> bool:
        return bool(self.requirements) or self.uncertainty is not None or \
            self.limit is not None or self.sweep is not None or bool(self.measurements)

    @property
    def validation_sets(self) -> tuple[MeasurementSet, ...]:
        return tuple(m for m in self.measurements if not m.for_calibration)

    @property
    def calibration_sets(self) -> tuple[MeasurementSet, ...]:
        return tuple(m for m in self.measurements if m.for_calibration)

    @property
    def validation_targets(self) -> tuple[Target, ...]:
        """The figures of every validation point, each once (the design runs follow them)."""
        found: list[Target] = []
        for measurement in self.validation_sets:
            found += [t for t in measurement.targets() if t not in found]
        return tuple(found)
