"""Write a :class:`~capacity.scenario.types.Scenario` as a scenario file (TOML, plain SI numbers).

The output reads back with :func:`capacity.scenario.load.load_scenario` to the same scenario (numbers are
written with ``repr``, which round-trips float64 exactly). Keys follow the loader's file layout.
"""

from __future__ import annotations

import math


def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ValueError(f"cannot write the non-finite number {v!r} to a scenario file")
        return repr(float(v))
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (tuple, list)):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    return _value(float(v))


def scenario_toml(scenario, comments: tuple[str, ...] = ()) -> str:
    """The TOML text of ``scenario`` (SI numbers: m, s, m^2/s, 1/s, molecules); ``comments`` go on top."""
    lines = [f"# {c}" for c in comments]
    lines.append("# all numbers in SI units: metres, seconds, m^2/s, 1/s, molecules")
    lines.append(f"name = {_value(scenario.name)}")
    m = scenario.medium
    lines += ["", "[medium]", f"diffusion = {_value(float(m.diffusion))}",
              f"degradation = {_value(float(m.degradation))}"]
    for e in scenario.emitters:
        lines += ["", "[[emitter]]", f"name = {_value(e.name)}",
                  f"position = {_value([float(x) for x in e.position])}"]
    for r in scenario.receivers:
        centre = _value([float(x) for x in r.centre])
        lines += ["", "[[receiver]]", f"name = {_value(r.name)}", f"centre = {centre}",
                  f"radius = {_value(float(r.radius))}", f"kind = {_value(r.kind)}"]
        if r.sample_offset is not None:
            lines.append(f"sample_offset = {_value(float(r.sample_offset))}")
    c = scenario.channel
    lines += ["", "[channel]", f"symbol_interval = {_value(float(c.symbol_interval))}",
              f"memory = {_value(c.memory if isinstance(c.memory, str) else int(c.memory))}",
              f"memory_tolerance = {_value(float(c.memory_tolerance))}"]
    if len(c.background):
        lines.append(f"background = {_value([float(b) for b in c.background])}")
    lines += [f"counting = {_value(c.counting)}", f"residual = {_value(c.residual)}",
              f"response = {_value(c.response)}", f"particle_count = {_value(int(c.particle_count))}"]
    if c.particle_step is not None:
        lines.append(f"particle_step = {_value(float(c.particle_step))}")
    lines.append(f"seed = {_value(int(c.seed))}")
    s = scenario.signalling
    lines += ["", "[signalling]", f"scheme = {_value(s.scheme)}", f"levels = {_value(int(s.levels))}",
              f"peak = {_value(float(s.peak))}"]
    if s.budget is not None:
        lines.append(f"budget = {_value(float(s.budget))}")
    lines += [f"emitter = {_value(int(s.emitter))}", f"silent = {_value(bool(s.silent))}"]
    if s.amplitudes is not None:
        lines.append(f"amplitudes = {_value([float(a) for a in s.amplitudes])}")
    return "\n".join(lines) + "\n"
