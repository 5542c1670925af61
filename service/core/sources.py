"""Machine descriptions expanded into labelled tones: the source registry.

Each source is a small frozen dataclass (validated on construction) whose ``expand()``
returns a :class:`~service.core.tones.ToneSet`. Every tone keeps the label of the
source it came from, so an answer can say "BPFI 3× of bearing 'input shaft bearing'".
The families live in their own modules (:mod:`~service.core.rotating_sources`,
:mod:`~service.core.bearing_sources`, :mod:`~service.core.electrical_sources`,
:mod:`~service.core.fixed_sources`, shared parts in :mod:`~service.core.source_base`);
this module holds the registry (:data:`SOURCE_TYPES`), :func:`expand_sources` and the
plain dict form, and re-exports the family names for existing importers.

The part of a tone's frequency that moves with machine speed goes into ``speed_hz`` and
the rest into ``fixed_hz``.

References
----------
.. [1] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics — a tutorial",
   *Mechanical Systems and Signal Processing* 25 (2011) 485–520, sec. 2.1 (defect
   frequencies FTF, BPFO, BPFI, BSF).
.. [2] D. G. Holmes and T. A. Lipo, *Pulse Width Modulation for Power Converters:
   Principles and Practice*, IEEE Press/Wiley, 2003, ch. 3 (naturally sampled
   sine-triangle modulation of a phase leg: lines at m·fc ± n·f1 with m + n odd; in
   the line-to-line voltage of a three-phase bridge the triplen sidebands cancel).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence
from typing import Any, TypeAlias

import numpy as np
from numpy.typing import NDArray

from service.core.checks import check_positive
from service.core.errors import InputError
from service.core.tones import ToneSet

from .bearing_sources import Bearing
from .electrical_sources import LineHarmonics, PwmCarrier, fundamental_from_shaft
from .fixed_sources import ExplicitTones, Resonance
from .rotating_sources import BladePass, GearMesh, Shaft
from .source_base import short_repr, speed_to_hz

__all__ = [
    "SOURCE_TYPES",
    "Source",
    "expand_sources",
    "source_from_dict",
    "source_to_dict",
]

FloatArray = NDArray[np.float64]


Source: TypeAlias = (
    Shaft | GearMesh | Bearing | BladePass | LineHarmonics | PwmCarrier | Resonance | ExplicitTones
)


#: Source classes by the type name used in the JSON API.
SOURCE_TYPES: dict[str, type[Any]] = {
    "shaft": Shaft,
    "gear_mesh": GearMesh,
    "bearing": Bearing,
    "blade_pass": BladePass,
    "line": LineHarmonics,
    "pwm": PwmCarrier,
    "resonance": Resonance,
    "tones": ExplicitTones,
}


_TYPE_NAMES: dict[type[Any], str] = {cls: name for name, cls in SOURCE_TYPES.items()}


def expand_sources(sources: Sequence[Source]) -> ToneSet:
    """Expand several sources into one ToneSet, in the given sequence.

    Parameters
    ----------
    sources : sequence of Source
        Source objects (:data:`SOURCE_TYPES` values).

    Returns
    -------
    ToneSet
        All their tones, concatenated; empty for no sources.
    """
    parts = []
    for i, s in enumerate(sources):
        if type(s) not in _TYPE_NAMES:
            raise InputError(
                f"sources[{i}] is a {type(s).__name__}; expected one of "
                f"{[c.__name__ for c in SOURCE_TYPES.values()]}",
                field=f"sources[{i}]",
                code="invalid",
            )
        parts.append(s.expand())
    return ToneSet.concat(parts)


_SPEED_KEYS = ("hz", "rpm", "cpm")


def _pop_speed(d: dict[str, Any], prefix: str, type_name: str, required: bool) -> float | None:
    """Pop ``<prefix>_hz`` / ``_rpm`` / ``_cpm`` (exactly one if required) and return Hz."""
    given = [u for u in _SPEED_KEYS if d.get(f"{prefix}_{u}") is not None]
    for u in _SPEED_KEYS:
        if d.get(f"{prefix}_{u}", 0) is None:
            del d[f"{prefix}_{u}"]
    names = [f"{prefix}_{u}" for u in _SPEED_KEYS]
    if len(given) > 1:
        raise InputError(
            f"source type {type_name!r} got {', '.join(f'{prefix}_{u}' for u in given)}; "
            f"give exactly one of {', '.join(names)}",
            field=None,
            code="conflict",
        )
    if not given:
        if required:
            raise InputError(
                f"source type {type_name!r} needs a speed: give exactly one of {', '.join(names)}",
                field=None,
                code="missing",
            )
        return None
    unit = given[0]
    key = f"{prefix}_{unit}"
    value = d.pop(key)
    check_positive(value, key, cut=80)
    return speed_to_hz(value, unit)


def source_from_dict(d: Mapping[str, Any]) -> Source:
    """Build a source from a plain dict (e.g. parsed JSON).

    Parameters
    ----------
    d : mapping
        ``"type"`` (a key of :data:`SOURCE_TYPES`) plus the class's fields. Where a class
        has ``speed_hz``, the speed may instead be given as ``speed_rpm`` or ``speed_cpm``
        (exactly one of the three); likewise ``mating_speed_hz`` / ``_rpm`` / ``_cpm``
        for a gear mesh (optional). For ``"pwm"``, ``fundamental_hz`` may be replaced by
        a shaft speed (``speed_hz`` / ``_rpm`` / ``_cpm``) and ``pole_pairs``. Lists are
        accepted where the class takes tuples; None means "not given".

    Returns
    -------
    Source
        The validated source object.
    """
    if not isinstance(d, Mapping):
        raise InputError(
            f"a source must be an object with a 'type' key, got {short_repr(d)}",
            field=None,
            code="bad_type",
        )
    body = dict(d)
    type_name = body.pop("type", None)
    if not isinstance(type_name, str) or type_name not in SOURCE_TYPES:
        raise InputError(
            f"unknown source type {short_repr(type_name)}; expected one of "
            f"{', '.join(SOURCE_TYPES)}",
            field="type",
            code="not_allowed",
        )
    cls = SOURCE_TYPES[type_name]
    fields = {f.name: f for f in dataclasses.fields(cls)}

    if "speed_hz" in fields:
        body["speed_hz"] = _pop_speed(body, "speed", type_name, required=True)
    if "mating_speed_hz" in fields:
        body["mating_speed_hz"] = _pop_speed(body, "mating_speed", type_name, required=False)
    if cls is PwmCarrier:
        shaft_hz = _pop_speed(body, "speed", type_name, required=False)
        pole_pairs = body.pop("pole_pairs", None)
        if shaft_hz is not None or pole_pairs is not None:
            if body.get("fundamental_hz") is not None:
                raise InputError(
                    "source type 'pwm' got fundamental_hz and a shaft speed/pole_pairs; "
                    "give fundamental_hz, or a shaft speed with pole_pairs",
                    field="fundamental_hz",
                    code="conflict",
                )
            if shaft_hz is None or pole_pairs is None:
                raise InputError(
                    "source type 'pwm' needs both a shaft speed (speed_hz, speed_rpm or "
                    "speed_cpm) and pole_pairs to derive fundamental_hz",
                    field="pole_pairs",
                    code="missing",
                )
            body["fundamental_hz"] = fundamental_from_shaft(shaft_hz, pole_pairs)

    unknown = sorted(k for k in body if k not in fields)
    if unknown:
        raise InputError(
            f"unknown field {unknown[0]!r} for source type {type_name!r}; expected "
            f"fields: {', '.join(fields)}",
            field=unknown[0],
            code="not_allowed",
        )
    kwargs = {k: v for k, v in body.items() if v is not None}
    for name, f in fields.items():
        required = f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING
        if required and name not in kwargs:
            raise InputError(
                f"source type {type_name!r} needs field {name!r}", field=name, code="missing"
            )
    for k, v in kwargs.items():
        if isinstance(v, list):
            kwargs[k] = tuple(v)
    src: Source = cls(**kwargs)
    return src


def source_to_dict(source: Source) -> dict[str, Any]:
    """Plain-dict form of a source (``"type"`` plus fields; tuples as lists).

    ``source_from_dict(source_to_dict(s)) == s`` for every source ``s``.
    """
    if type(source) not in _TYPE_NAMES:
        raise InputError(
            f"{type(source).__name__} is not a source type", field=None, code="bad_type"
        )
    out: dict[str, Any] = {"type": _TYPE_NAMES[type(source)]}
    for f in dataclasses.fields(source):
        v = getattr(source, f.name)
        out[f.name] = list(v) if isinstance(v, tuple) else v
    return out
