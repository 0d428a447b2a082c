"""Every parameter of a scenario as the loader read it, with its unit: what ``capacity check`` echoes.

Walks the scenario's dataclasses generically, so a field added later is echoed too (in SI units when it has no
display unit in :data:`DISPLAY`).
"""

from __future__ import annotations

import dataclasses

import numpy as np

#: field name -> (display unit, factor from SI, SI unit)
DISPLAY = {
    "diffusion": ("um^2/s", 1e12, "m^2/s"),
    "degradation": ("1/s", 1.0, "1/s"),
    "flow": ("um/s", 1e6, "m/s"),
    "position": ("um", 1e6, "m"),
    "centre": ("um", 1e6, "m"),
    "point": ("um", 1e6, "m"),
    "radius": ("um", 1e6, "m"),
    "pulse": ("ms", 1e3, "s"),
    "sample_offset": ("ms", 1e3, "s"),
    "reaction_rate": ("um/s", 1e6, "m/s"),
    "symbol_interval": ("ms", 1e3, "s"),
    "particle_step": ("ms", 1e3, "s"),
    "background": ("counts per slot", 1.0, "counts per slot"),
    "memory": ("lags", 1.0, "lags"),
    "memory_tolerance": ("of a pair's largest slot", 1.0, "fraction"),
    "particle_count": ("molecules per emitter", 1.0, "molecules"),
    "peak": ("molecules", 1.0, "molecules"),
    "budget": ("molecules per symbol", 1.0, "molecules"),
    "amplitudes": ("molecules", 1.0, "molecules"),
    "levels": ("levels, 0 included", 1.0, "levels"),
}


#: what a missing (None) value means, by field name
NONE_MEANS = {"sample_offset": "none (the end of the slot)", "particle_step": "none (automatic)",
              "budget": "none (no mean constraint)", "amplitudes": "none (from levels and peak)",
              "reaction_rate": "none (not a reactive receiver)"}


def _shown(value, factor):
    if isinstance(value, (bool, str)) or value is None:
        return "none" if value is None else str(value).lower() if isinstance(value, bool) else value
    if isinstance(value, (tuple, list, np.ndarray)):
        return "[" + ", ".join(str(_shown(v, factor)) for v in value) + "]"
    if isinstance(value, (int, float, np.integer, np.floating)):
        return f"{float(value) * factor:.6g}" if factor != 1.0 or isinstance(value, float) else str(value)
    return str(value)


def _si(value):
    if isinstance(value, (tuple, list)):
        return [_si(v) for v in value]
    if isinstance(value, (np.integer, np.floating)):
        return value.item()
    return value


def parameters(scenario) -> list[dict]:
    """One entry per parameter: ``field`` (dotted path), ``value`` (SI, JSON-ready), ``unit`` (SI unit or ""),
    ``shown`` (value in its display unit) and ``display_unit``."""
    out = []

    def walk(obj, prefix):
        for f in dataclasses.fields(obj):
            value = getattr(obj, f.name)
            if f.name == "name" and prefix:
                continue
            path = f"{prefix}.{f.name}" if prefix else f.name
            unit, factor, si = DISPLAY.get(f.name, ("", 1.0, ""))
            shown = _shown(value, factor)
            if value is None or isinstance(value, str):
                unit = ""
                shown = NONE_MEANS.get(f.name, "none") if value is None else shown
            out.append({"field": path, "value": _si(value), "unit": si, "shown": shown, "display_unit": unit})

    walk(scenario.medium, "medium")
    for kind, items in (("emitter", scenario.emitters), ("receiver", scenario.receivers),
                        ("wall", getattr(scenario, "walls", ()))):
        for k, item in enumerate(items):
            label = f"{kind}[{k}]" + (f" ({item.name})" if getattr(item, "name", None) else "")
            walk(item, label)
    walk(scenario.channel, "channel")
    walk(scenario.signalling, "signalling")
    return out


def format_parameters(scenario) -> list[str]:
    """Aligned text lines: ``field = value unit``."""
    rows = parameters(scenario)
    width = max(len(r["field"]) for r in rows)
    return [f"  {r['field']:<{width}} = {r['shown']} {r['display_unit']}".rstrip() for r in rows]


LEGEND = ("lone capture: the fraction of an emitter's molecules a receiver would absorb eventually if it were "
          "alone in the fluid (other receivers take their share in the shadowed model); peak ms: when the arrival "
          "rate peaks after a release; peak slots: that time in symbol intervals")
