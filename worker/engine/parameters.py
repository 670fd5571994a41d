"""The case fields of a reaction or boundary kind, as the kind declares them.

A kind lists its parameters once (name, physical dimension, sign, whether the case must give it);
the case schema builds its fields from that list and the engine reads the values by name from
``model.Reaction`` / ``model.Boundary``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

Sign = Literal["any", "non_negative", "positive"]


@dataclass(frozen=True)
class Parameter:
    """One parameter of a kind.

    Attributes
    ----------
    name : str
        The field name in the case document and on the model object.
    dimension : str or None
        A key of ``worker.engine.units.KINDS`` (``"concentration"``, ``"velocity"``...), or None
        for a plain dimensionless number.
    sign : {"any", "non_negative", "positive"}
        The bound on the SI value.
    required : bool
        Whether a case must give it.
    """

    name: str
    dimension: str | None
    sign: Sign = "non_negative"
    required: bool = True
