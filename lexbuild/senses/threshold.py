"""The threshold policy of sense induction, in one place.

The clusterer's calibrated parameter (the "threshold") is chosen, in this order:

1. a number given in the settings: used as is;
2. a calibration (``calibration.json``, its folder, or a ``Calibration``): its recommended value,
   after checking that it was calibrated for the same representation (name, model, settings),
   the same clusterer and the same clusterer parameters (a cosine cut is not a Ward height);
3. otherwise a calibration run now on the corpus, with the same clusterer, parameters,
   ``random_state`` and pseudo-verb sampling as ``lexbuild calibrate`` (``settings.calibration``);
   when the corpus is too small to build pseudo-verbs, the clusterer's default value.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.errors import InductionError
from lexbuild.senses.calibrate import Calibration, calibrate, read_calibration
from lexbuild.senses.registry import get_clusterer
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.vectors import CacheStats, Representation, VectorCache

__all__ = ["ThresholdChoice", "check_calibration", "choose_threshold"]


@dataclass(frozen=True)
class ThresholdChoice:
    """The value used and where it came from (``source`` is a sentence for the user)."""

    value: float
    source: str
    calibration: Calibration | None = None


def check_calibration(
    data: dict[str, Any],
    representation: Representation,
    settings: InductionSettings,
    origin: str = "the calibration",
) -> float:
    """The recommended value of a calibration made for this run's set-up, else an error."""
    from lexbuild.senses.vectors import canonical_representation_name

    recorded = canonical_representation_name(str(data.get("representation")), origin)
    if recorded != representation.id or data.get("model") not in (None, representation.model):
        raise InductionError(
            f"{origin}: calibrated for {recorded} ({data.get('model')}), but this run uses "
            f"{representation.id} ({representation.model}); calibrate again or give a threshold"
        )
    recorded_settings = data.get("representation_settings")
    if recorded_settings is not None and recorded_settings != representation.settings:
        raise InductionError(
            f"{origin}: calibrated with other settings of {representation.id} "
            f"({recorded_settings}); this run uses {representation.settings}"
        )
    spec = get_clusterer(settings.clusterer)
    options = data.get("settings") or {}
    # Files written before clustering methods were pluggable are agglomerative ones.
    clusterer = str(data.get("clusterer") or options.get("clusterer") or "agglomerative")
    if clusterer != spec.name:
        raise InductionError(
            f"{origin}: calibrated for the clusterer {clusterer}, but this run uses "
            f"{spec.name}; calibrate with --clusterer {spec.name} or give a threshold"
        )
    for name, value in spec.params(settings).items():
        if options.get(name) != value:
            raise InductionError(
                f"{origin}: calibrated with {name}={options.get(name)!r}, but this run uses "
                f"{name}={value!r}; calibrate again with the same settings or give a threshold"
            )
    return float(data["recommended"]["threshold"])


def choose_threshold(
    occurrences: Sequence[Occurrence],
    representation: Representation,
    settings: InductionSettings,
    calibration: str | Path | Calibration | None = None,
    *,
    cache: VectorCache | None = None,
    stats: CacheStats | None = None,
    progress: Callable[[int], None] | None = None,
    executor: Any = None,
    counts: Mapping[str, int] | None = None,
) -> ThresholdChoice:
    """Apply the policy of the module docstring.

    A transformer with ``layers="auto"`` takes its layer mix from the calibration as well: the
    one recorded in the calibration given, else the one a calibration run now chooses (even when
    the threshold itself is given).
    """
    choose_layers = getattr(representation, "needs_layer_choice", False)
    if not settings.calibrates and not (choose_layers and calibration is None):
        if choose_layers:
            _use_recorded_layers(calibration, representation)
        return ThresholdChoice(float(settings.threshold), "given")
    if isinstance(calibration, Calibration):
        _use_recorded_layers(calibration, representation)
        value = check_calibration(calibration.to_json(), representation, settings)
        return ThresholdChoice(value, "the given calibration", calibration)
    if calibration is not None:
        data = read_calibration(calibration)
        _use_recorded_layers(data, representation, origin=str(calibration))
        value = check_calibration(data, representation, settings, origin=str(calibration))
        return ThresholdChoice(value, f"calibration file {calibration}")
    spec = get_clusterer(settings.clusterer)
    try:
        calibrated = calibrate(
            occurrences, representation, settings, cache=cache, stats=stats, progress=progress,
            executor=executor, counts=counts,
        )
    except InductionError as error:
        if choose_layers:
            raise InductionError(
                f"--layers auto: {error}; or choose the layers with 'lexbuild calibrate "
                "--layers auto' on a larger corpus and pass --calibration"
            ) from None
        fallback = spec.default(settings)
        return ThresholdChoice(
            fallback, f"default of {spec.name} (no calibration possible: {error})"
        )
    best = calibrated.recommended
    if not settings.calibrates:  # calibrated for the layers only
        return ThresholdChoice(float(settings.threshold), "given", calibrated)
    return ThresholdChoice(
        best.threshold,
        f"calibrated on {len(calibrated.pseudo_verbs)} pseudo-verbs (mean ARI {best.ari:.3f})",
        calibrated,
    )


def _use_recorded_layers(
    calibration: str | Path | Calibration | dict[str, Any] | None,
    representation: Representation,
    origin: str = "the calibration",
) -> None:
    """Set the layer mix a calibration chose on a transformer whose layers are "auto"."""
    if not getattr(representation, "needs_layer_choice", False) or calibration is None:
        return
    if isinstance(calibration, Calibration):
        data: dict[str, Any] = calibration.to_json()
    elif isinstance(calibration, dict):
        data = calibration
    else:
        data = read_calibration(calibration)
        origin = str(calibration)
    layers = data.get("layers")
    if not isinstance(layers, dict) or "chosen" not in layers:
        raise InductionError(
            f"{origin}: no layer choice recorded; calibrate with --layers auto"
        )
    representation.use_layers(layers["chosen"])  # type: ignore[attr-defined]
