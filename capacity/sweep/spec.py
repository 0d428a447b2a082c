"""A whole sweep described: the scenario table, the axes, the measure and its settings, the base seed.

A scenario file may carry its own sweep as a ``[sweep]`` table (command-line options add to it, and win for
the same field or setting)::

    [sweep]
    measure = "rate"                      # rate | compare | response
    symbols = 4000                        # settings: symbols, runs, bound_samples, window_samples,
    runs = 4                              #   law_search, model, schemes, seed
    [sweep.vary]
    "channel.symbol_interval" = "50ms:400ms:4:log"
    "receiver[*].radius" = ["3 um", "5 um"]
"""

from __future__ import annotations

import dataclasses
import sys
import warnings

from capacity.errors import InputError
from capacity.sweep.grid import Axis, check_axes, parse_axis
from capacity.sweep.measures import MEASURES

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

#: ``[sweep]`` key / keyword -> measure setting
SETTING_NAMES = {"symbols": "n_symbols", "runs": "n_runs", "bound_samples": "bound_samples",
                 "window_samples": "window_samples", "law_search": "optimise_law", "model": "model",
                 "schemes": "schemes"}
_SWEEP_KEYS = ("vary", "measure", "seed", *SETTING_NAMES)


@dataclasses.dataclass(frozen=True)
class SweepSpec:
    """data : scenario table (TOML dict, no ``[sweep]``); source : where it came from; axes : grid axes;
    measure : name in :data:`MEASURES`; settings : the measure's settings (defaults filled in); base_seed."""

    data: dict
    source: str
    axes: tuple[Axis, ...]
    measure: str
    settings: dict
    base_seed: int


def read_table(scenario: str) -> tuple[dict, str]:
    """The TOML table of a scenario file or built-in name, after the loader has accepted it, with deprecated key
    names (:data:`capacity.scenario.load.RENAMED`) renamed (the loader has given its note about them)."""
    from capacity.scenario.load import BUILTIN, builtin_path, load_scenario, rename_deprecated_keys

    load_scenario(scenario)  # the loader's own messages for an unreadable or invalid file
    path = builtin_path(scenario) if scenario in BUILTIN else scenario
    with open(path, "rb") as fh:
        table = tomllib.loads(fh.read().decode("utf-8"))
    return rename_deprecated_keys(table, str(scenario))[0], str(scenario)


def _file_axes(table) -> list[str]:
    if not isinstance(table, dict):
        raise InputError("sweep.vary", table, "must be a table of FIELD = values",
                         'write [sweep.vary] with lines such as "channel.symbol_interval" = "50ms:400ms:4:log"')
    out = []
    for field, values in table.items():
        if isinstance(values, list):
            sep = ";" if field.rstrip().endswith(("position", "centre", "flow", "point", "normal")) else ","
            values = sep.join(",".join(str(c) for c in v) if isinstance(v, list) else str(v) for v in values)
        out.append(f"{field}={values}")
    return out


def make_spec(scenario: str | dict, vary=(), *, measure: str | None = None, settings: dict | None = None,
              seed: int | None = None, force: bool = False, source: str | None = None) -> SweepSpec:
    """Build a :class:`SweepSpec` from a scenario (file path, built-in name or TOML-shaped dict), ``--vary``
    texts and settings (keys of :data:`SETTING_NAMES`); the scenario's own ``[sweep]`` table is merged under
    them. Raises :class:`InputError` naming the option (``--vary``, ``--measure``...) for bad input."""
    if isinstance(scenario, dict):
        from capacity.scenario.load import ScenarioKeyWarning, rename_deprecated_keys

        src = source or "<dict>"
        data, notes = rename_deprecated_keys(dict(scenario), src)  # the points are built from the new names
        for note in notes:
            warnings.warn(note, ScenarioKeyWarning, stacklevel=2)
    else:
        data, src = read_table(scenario)
    table = data.pop("sweep", {}) or {}
    if not isinstance(table, dict):
        raise InputError("sweep", table, "must be a table", "write a [sweep] section")
    for key in table:
        if key not in _SWEEP_KEYS:
            from capacity.scenario.load import _suggest

            raise InputError(f"sweep.{key}", table[key], "unknown key in [sweep]", _suggest(key, _SWEEP_KEYS))
    axes = {}
    for text in _file_axes(table.get("vary", {})):
        ax = parse_axis(text, "sweep.vary")
        axes[ax.field.path] = ax
    on_command_line = set()
    for text in vary:
        ax = parse_axis(text, "--vary")
        if ax.field.path in on_command_line:
            raise InputError("--vary", text, f"{ax.field.path} is varied twice", "give each field once")
        on_command_line.add(ax.field.path)
        axes[ax.field.path] = ax  # the command line wins over the file for the same field
    name = measure or table.get("measure", "rate")
    if name not in MEASURES:
        from capacity.scenario.load import _nearest

        close = _nearest(name, list(MEASURES))
        raise InputError("--measure", name, "is not a measure", (f'did you mean "{close}"? ' if close else "")
                         + "choose from " + ", ".join(MEASURES))
    m = MEASURES[name]
    given = {k: table[k] for k in SETTING_NAMES if k in table}
    given.update({k: v for k, v in (settings or {}).items() if v is not None})
    full = dict(m.defaults)
    for key, value in given.items():
        if key not in SETTING_NAMES:
            raise InputError(key, value, "is not a sweep setting", "use one of " + ", ".join(SETTING_NAMES))
        target = SETTING_NAMES[key]
        if target not in full:
            raise InputError(f"--{key.replace('_', '-')}", value, f"does not apply to --measure {name}",
                             "leave it out, or choose a measure that uses it")
        if target in ("n_symbols", "n_runs", "bound_samples", "window_samples"):
            if isinstance(value, bool) or not isinstance(value, int) or value < (2 if target == "n_runs" else 1):
                raise InputError(f"--{key.replace('_', '-')}", value, "must be a whole number >= "
                                 f"{2 if target == 'n_runs' else 1}", "give e.g. 2000")
        if target == "schemes" and isinstance(value, str):
            value = [s.strip() for s in value.split(",") if s.strip()]
        if target == "schemes":
            from capacity.compare import SCHEMES

            bad = [s for s in value if s not in SCHEMES] if isinstance(value, list) else [value]
            if bad or not value:
                raise InputError("--schemes", value, f"unknown scheme {bad[0] if bad else '(none)'}",
                                 "choose from " + ", ".join(SCHEMES))
        full[target] = value
    if full.get("model") not in (None, "lone", "shadowed", "particles"):
        raise InputError("--model", full["model"], "unknown response model", "use lone, shadowed or particles")
    base = table.get("seed") if seed is None else seed
    if base is None:
        base = int(data.get("channel", {}).get("seed", 0))
    if isinstance(base, bool) or not isinstance(base, int) or base < 0:
        raise InputError("--seed", base, "must be a whole number >= 0", "give e.g. 7")
    checked = check_axes(list(axes.values()), force=force)
    return SweepSpec(data, src, tuple(checked), name, full, int(base))
