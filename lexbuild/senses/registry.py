"""The registry of clustering methods: name -> module defining its ``ClustererSpec``.

A method is one module (``lexbuild.senses.agglomerative`` ...) defining ``SPEC`` plus one line
in ``CLUSTERERS``. Modules are imported only when their method is used, so a method's heavy
dependencies cost nothing to the others, and the CLI lists the names without importing numpy.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from lexbuild.errors import InductionError

if TYPE_CHECKING:
    from lexbuild.senses.clustering import Clusterer
    from lexbuild.senses.settings import InductionSettings

__all__ = ["CLUSTERERS", "ClustererSpec", "clusterer_names", "get_clusterer"]

#: Registered clustering methods: CLI name -> module defining ``SPEC``.
CLUSTERERS: dict[str, str] = {
    "agglomerative": "lexbuild.senses.agglomerative",
    "hdbscan": "lexbuild.senses.hdbscan",
    "affinity-propagation": "lexbuild.senses.affinity",
}


@dataclass(frozen=True)
class ClustererSpec:
    """A registered method.

    ``parameter``: the name of its calibrated parameter, in the method's own terms.
    ``default(settings)``: the value used when no threshold is given and calibration is not
    possible; ``grid(settings)``: the values calibration sweeps. ``make(settings, value)``: a
    clusterer with that value. ``params(settings)``: the settings its result depends on, which a
    calibration file must match before its recommendation is used.
    """

    name: str
    parameter: str
    description: str
    default: Callable[[InductionSettings], float]
    grid: Callable[[InductionSettings], tuple[float, ...]]
    make: Callable[[InductionSettings, float], Clusterer]
    params: Callable[[InductionSettings], dict[str, Any]]


def clusterer_names() -> tuple[str, ...]:
    return tuple(CLUSTERERS)


def get_clusterer(name: str) -> ClustererSpec:
    """The spec of a registered method; an unknown name is an error naming the known ones."""
    module = CLUSTERERS.get(name)
    if module is None:
        raise InductionError(
            f"unknown clusterer {name!r}; expected one of {', '.join(CLUSTERERS)}"
        )
    spec = importlib.import_module(module).SPEC
    if not isinstance(spec, ClustererSpec) or spec.name != name:
        raise InductionError(f"{module}.SPEC does not define the clusterer {name!r}")
    return spec
