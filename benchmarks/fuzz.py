"""Fuzz the scenario loader, the response models, the command line and the array entry points for a fixed time.

    python benchmarks/fuzz.py --minutes 10 [--seed 1] [--out results/fuzz]
    python benchmarks/fuzz.py --replay scenario:123456      # re-run one case (prints its outcome)

Every case is built from its own seed (``KIND:SEED``), so a finding is reproduced by ``--replay``. Kinds:

* ``scenario`` - a seed scenario (the built-in demo and ``tests/data/scenarios/*.toml``) mutated on its parsed
  form: numbers scaled by extreme factors or replaced by NaN, inf, huge or negative values, units swapped,
  keys dropped or misspelt, types changed, values nested deeply; loaded with ``scenario_from_dict`` and, when
  accepted, given to ``channel_response`` (``lone``, sometimes ``shadowed``).
* ``scenario_text`` - mutations of the file text (duplicated keys and tables, deep nesting, huge literals,
  truncation, stray bytes), read with ``load_scenario``.
* ``cli`` - a mutated scenario written to a file and run as ``capacity check`` or ``capacity response --model
  lone --json`` in a fresh interpreter: exit 0 with sane output, or exit 2 with one ``error:`` line naming the
  field and a fix; anything else (exit 1, a traceback, a warning on stderr, a time-out) is a finding.
* ``blahut_arimoto``, ``poisson_transition``, ``lone_hits`` - direct calls with random (sometimes hostile)
  arrays (``lone_hits`` is a raw kernel documented to need emitters outside the spheres: only such layouts).

Accepted outcomes: a result that keeps the invariants (probabilities in [0, 1]; an absorbing pair's hits plus
tail at most 1 (a passive receiver's tail counts later visits and may exceed 1); the total over receivers at
most 1 for ``shadowed``; a capacity finite, in [0, log2 S], with a non-negative gap; transition rows plus
truncated mass equal to 1) or an ``InputError`` naming a field.
Library cases run in a worker process with a per-case time limit; a case over it is a finding (and the
worker is restarted). Writes ``OUT/report.json`` and ``OUT/report.md``: cases run per kind, outcomes,
findings with their reproducer.
"""

from __future__ import annotations

import argparse
import copy
import json
import math
import multiprocessing as mp
import os
import re
import subprocess
import sys
import tempfile
import time
import traceback
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
SEED_FILES = [ROOT / "capacity" / "data" / "demo.toml", *sorted((ROOT / "tests" / "data" / "scenarios").glob("*.toml"))]
KINDS = {"scenario": 0.40, "scenario_text": 0.12, "cli": 0.12, "blahut_arimoto": 0.14, "poisson_transition": 0.12,
         "lone_hits": 0.10}
LIMIT_S = {"scenario": 90.0, "scenario_text": 30.0, "blahut_arimoto": 60.0, "poisson_transition": 30.0,
           "lone_hits": 60.0, "cli": 120.0}
ROUND = 1e-9  # round-off allowance on the invariants

FACTORS = [0.0, -1.0, 1e-300, 1e-30, 1e-12, 1e-6, 1e-3, 0.5, 2.0, 1e3, 1e6, 1e12, 1e30, 1e300]
SPECIALS = [math.nan, math.inf, -math.inf, -1, 0, 10**400, -(10**30), 1e-320, 1e308, 2**63, True, "abc", "",
            [], {}, [1, 2], {"x": 1}, "nan", "inf m", "1e1000000 um", "5 parsecs", "2 um*9**9**9", "-5 um"]
UNITS = ["m", "um", "nm", "mm", "km", "s", "ms", "us", "min", "h", "1/s", "um^2/s", "m^2/s", "cm^2/s", "kg",
         "parsecs^2/fortnight", "", "um um", "1/um", "dimensionless", "%", "um/s"]


# ----------------------------------------------------------------------------------------- TOML writing
def _key(k: str) -> str:
    return k if re.fullmatch(r"[A-Za-z0-9_-]+", k) else json.dumps(k)


def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_key(k)} = {_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def to_toml(data: dict) -> str:
    """A scenario dictionary as TOML text (scalars first, then tables, then arrays of tables)."""
    lines, tables, arrays = [], [], []
    for k, v in data.items():
        if isinstance(v, dict):
            tables.append((k, v))
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            arrays.append((k, v))
        else:
            lines.append(f"{_key(k)} = {_value(v)}")
    for k, v in tables:
        lines.append(f"\n[{_key(k)}]")
        lines += [f"{_key(a)} = {_value(b)}" for a, b in v.items()]
    for k, items in arrays:
        for item in items:
            lines.append(f"\n[[{_key(k)}]]")
            lines += [f"{_key(a)} = {_value(b)}" for a, b in item.items()]
    return "\n".join(lines) + "\n"


# ----------------------------------------------------------------------------------------- mutations
def _seeds() -> list[tuple[str, str, dict | None]]:
    import tomllib

    out = []
    for path in SEED_FILES:
        text = path.read_text()
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError:
            data = None
        out.append((path.name, text, data))
    return out


def _leaves(node, path=()):
    """Paths to every leaf (scalar or list of scalars) and every container of a parsed scenario."""
    if isinstance(node, dict):
        yield path, node
        for k, v in node.items():
            yield from _leaves(v, (*path, k))
    elif isinstance(node, list):
        yield path, node
        for i, v in enumerate(node):
            yield from _leaves(v, (*path, i))
    else:
        yield path, node


def _get(data, path):
    for p in path:
        data = data[p]
    return data


def _set(data, path, value):
    _get(data, path[:-1])[path[-1]] = value


def _scale_string(s: str, factor: float) -> str:
    m = re.match(r"\s*([-+0-9.eE]+)\s*(.*)", s)
    if not m:
        return s
    try:
        return f"{float(m.group(1)) * factor!r} {m.group(2)}".strip()
    except ValueError:
        return s


def mutate(data: dict, rng: np.random.Generator, n_ops: int) -> tuple[dict, list[str]]:
    data = copy.deepcopy(data)
    ops = []
    for _ in range(n_ops):
        nodes = [(p, v) for p, v in _leaves(data) if p]
        if not nodes:
            break
        path, value = nodes[rng.integers(len(nodes))]
        op = rng.choice(["scale", "special", "unit", "drop", "misspell", "type", "nest", "duplicate_item",
                         "option"])
        where = ".".join(map(str, path))
        if op == "scale" and isinstance(value, (int, float, str)) and not isinstance(value, bool):
            f = float(rng.choice(FACTORS))
            new = _scale_string(value, f) if isinstance(value, str) else value * f
            _set(data, path, new)
            ops.append(f"scale {where} by {f:g}")
        elif op == "special":
            new = copy.deepcopy(SPECIALS[rng.integers(len(SPECIALS))])
            _set(data, path, new)
            ops.append(f"set {where} = {str(new)[:40]}")
        elif op == "unit" and isinstance(value, str):
            m = re.match(r"\s*([-+0-9.eE]+)\s*(.*)", value)
            if m:
                new = f"{m.group(1)} {rng.choice(UNITS)}".strip()
                _set(data, path, new)
                ops.append(f"unit {where} -> {new}")
        elif op == "drop":
            del _get(data, path[:-1])[path[-1]]
            ops.append(f"drop {where}")
        elif op == "misspell" and isinstance(path[-1], str):
            parent = _get(data, path[:-1])
            k = path[-1]
            i = int(rng.integers(len(k) + 1))
            new_k = k[:i] + "x" + k[i:] if rng.random() < 0.5 else k.upper()
            parent[new_k] = parent.pop(k)
            ops.append(f"rename {where} -> {new_k}")
        elif op == "type":
            new = rng.choice(["text", "list", "table", "bool", "int"])
            conv = {"text": str(value)[:20], "list": [value] if not isinstance(value, dict) else [1],
                    "table": {"value": 1}, "bool": True, "int": 3}[new]
            _set(data, path, conv)
            ops.append(f"type {where} -> {new}")
        elif op == "nest" and not isinstance(value, dict):
            depth = int(rng.choice([2, 5, 50]))
            new = value
            for _ in range(depth):
                new = [new]
            _set(data, path, new)
            ops.append(f"nest {where} {depth} deep")
        elif op == "duplicate_item" and isinstance(value, list) and value:
            reps = int(rng.choice([2, 3, 8]))
            _set(data, path, value * reps)
            ops.append(f"repeat {where} x{reps}")
        elif op == "option" and path[-1] in ("kind", "response", "scheme", "counting", "residual", "memory"):
            new = rng.choice(["absorbing", "passive", "reactive", "lone", "shadowed", "particles", "amplitude",
                              "spatial", "multiplex", "hybrid", "binomial", "poisson", "auto", "drop", "xyz", 0,
                              200, 10**6])
            new = new.item() if hasattr(new, "item") else new
            _set(data, path, new)
            ops.append(f"set {where} = {new}")
    return data, ops


def mutate_text(text: str, rng: np.random.Generator) -> tuple[str, str]:
    lines = text.splitlines()
    op = rng.choice(["dup_line", "dup_table", "deep", "huge_int", "truncate", "bytes", "long_string", "dup_key"])
    if op == "dup_line" and lines:
        i = int(rng.integers(len(lines)))
        lines.insert(i, lines[i])
    elif op == "dup_table":
        tables = [i for i, ln in enumerate(lines) if ln.startswith("[") and not ln.startswith("[[")]
        if tables:
            i = tables[rng.integers(len(tables))]
            lines.append(lines[i])
            lines.append("x = 1")
    elif op == "deep":
        depth = int(rng.choice([100, 1000, 5000]))
        lines.insert(0, "deep = " + "[" * depth + "]" * depth)
    elif op == "huge_int":
        digits = int(rng.choice([20, 400, 4400, 10000]))
        lines.append(f"[channel.extra]\nn = 1{'0' * digits}")
    elif op == "truncate":
        text = text[: int(rng.integers(len(text)))]
        return text, f"truncate at {len(text)}"
    elif op == "bytes":
        i = int(rng.integers(len(text) + 1))
        junk = "".join(chr(int(c)) for c in rng.integers(0, 0x2FF, 6))
        return text[:i] + junk + text[i:], "insert stray characters"
    elif op == "long_string":
        lines.insert(0, f'name = "{"x" * 200000}"')
    elif op == "dup_key":
        keys = [i for i, ln in enumerate(lines) if "=" in ln and not ln.startswith("[")]
        if keys:
            i = keys[rng.integers(len(keys))]
            lines.insert(i + 1, lines[i].split("=")[0] + "= 1")
    return "\n".join(lines) + "\n", str(op)


# ----------------------------------------------------------------------------------------- cases
def make_case(kind: str, seed: int) -> dict:
    """The case KIND:SEED (deterministic): everything a worker needs, plus a readable description."""
    rng = np.random.default_rng(seed)
    seeds = _seeds()
    if kind in ("scenario", "cli"):
        usable = [(n, t, d) for n, t, d in seeds if d is not None]
        name, _, data = usable[rng.integers(len(usable))]
        mutated, ops = mutate(data, rng, int(rng.integers(1, 4)))
        case = {"kind": kind, "seed": seed, "source": name, "ops": ops, "toml": to_toml(mutated)}
        if kind == "cli":
            case["command"] = "check" if rng.random() < 0.6 else "response"
        else:
            case["data"] = mutated
            case["shadowed"] = bool(rng.random() < 0.25)
        return case
    if kind == "scenario_text":
        name, text, _ = seeds[rng.integers(len(seeds))]
        new, op = mutate_text(text, rng)
        return {"kind": kind, "seed": seed, "source": name, "ops": [op], "toml": new}
    if kind == "blahut_arimoto":
        n_sym = int(rng.choice([1, 2, 3, 7, 40, 65, 300, 4096]))
        n_out = int(rng.choice([1, 2, 5, 50, 2000]))
        if n_sym * n_out > 2_000_000:
            n_out = 5
        conc = float(rng.choice([0.01, 0.3, 1.0, 30.0]))
        hostile = rng.random() < 0.25
        return {"kind": kind, "seed": seed, "n_sym": n_sym, "n_out": n_out, "conc": conc, "hostile": hostile,
                "truncate": bool(rng.random() < 0.3), "cost": bool(rng.random() < 0.4),
                "budget_frac": float(rng.choice([-0.5, 0.0, 0.01, 0.3, 0.9, 1.5])),
                "tol": float(rng.choice([1e-12, 1e-9, 1e-6, 0.1]))}
    if kind == "poisson_transition":
        n_sym = int(rng.choice([1, 2, 5, 16]))
        n_recv = int(rng.choice([1, 2, 3]))
        scale = float(rng.choice([0.0, 1e-300, 1e-12, 1e-3, 1.0, 30.0, 1e3, 1e5, 1e11, 1e300]))
        return {"kind": kind, "seed": seed, "n_sym": n_sym, "n_recv": n_recv, "scale": scale,
                "tol": float(rng.choice([1e-16, 1e-12, 1e-6, 0.5])), "hostile": bool(rng.random() < 0.2)}
    if kind == "lone_hits":
        return {"kind": kind, "seed": seed, "n_e": int(rng.integers(1, 4)), "n_r": int(rng.integers(1, 4)),
                "length": float(rng.choice([1e-9, 1e-6, 1e-3, 1.0])),
                "diffusion": float(rng.choice([1e-15, 1e-12, 1e-10, 1e-9, 1e-6, 1.0])),
                "degradation": float(rng.choice([0.0, 1e-6, 1.0, 1e3, 1e9])),
                "interval": float(rng.choice([1e-9, 1e-3, 0.1, 10.0, 1e6])),
                "memory": int(rng.choice([0, 1, 5, 40])), "gap": float(rng.choice([1e-6, 1e-3, 0.1, 1.0, 10.0]))}
    raise ValueError(kind)


# ----------------------------------------------------------------------------------------- checks
class Breach(Exception):
    """An invariant broken by a returned result."""


def _check_response(resp, scenario) -> None:
    hits, tail = np.asarray(resp.hits), np.asarray(resp.tail)
    if not (np.all(np.isfinite(hits)) and np.all(np.isfinite(tail))):
        raise Breach("non-finite hit probability or tail")
    if hits.min(initial=0.0) < -ROUND or hits.max(initial=0.0) > 1 + ROUND:
        raise Breach(f"hit probability outside [0, 1]: [{hits.min():.3g}, {hits.max():.3g}]")
    absorbing = np.array([r.kind != "passive" for r in scenario.receivers])
    # a passive receiver counts a molecule at every sampling instant it is inside: its tail (expected later
    # counts) may exceed 1; an absorbing receiver's tail is a probability
    if tail.min(initial=0.0) < -ROUND or tail[:, absorbing].max(initial=0.0) > 1 + ROUND:
        raise Breach(f"tail negative or an absorbing tail above 1: [{tail.min():.3g}, {tail.max():.3g}]")
    totals = hits.sum(axis=2) + tail
    if np.any(totals[:, absorbing] > 1 + 1e-6):
        raise Breach(f"absorbing pair total above 1: {totals[:, absorbing].max():.6g}")
    if resp.model in ("shadowed", "particles") and absorbing.any():
        across = totals[:, absorbing].sum(axis=1)
        if np.any(across > 1 + 1e-6):
            raise Breach(f"total over absorbing receivers above 1: {across.max():.6g}")


def _run_library(case: dict) -> dict:
    """Run one library case in this process; return {'status', 'detail'}."""
    import warnings

    from capacity.errors import InputError

    kind = case["kind"]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", RuntimeWarning)  # a numpy warning leaking to the user is a finding
            detail = CASE_RUNNERS[kind](case)
        return {"status": "ok", "detail": detail}
    except InputError as exc:
        if not exc.field or not exc.fix:
            return {"status": "finding", "detail": f"InputError without field or fix: {exc}"}
        return {"status": "input_error", "detail": f"{exc.field}: {str(exc)[:200]}"}
    except Breach as exc:
        return {"status": "finding", "detail": f"invariant: {exc}"}
    except Exception as exc:  # noqa: BLE001  (anything else is what the fuzzer looks for)
        tb = traceback.format_exc(limit=6)
        return {"status": "finding", "detail": f"{type(exc).__name__}: {str(exc)[:300]}", "traceback": tb}


def _scenario_case(case: dict) -> str:
    from capacity.physics.response import channel_response
    from capacity.scenario.load import scenario_from_dict

    s = scenario_from_dict(case["data"], source="fuzz")
    resp = channel_response(s, model="lone")
    _check_response(resp, s)
    done = "lone"
    if case.get("shadowed") and len(s.receivers) <= 3 and all(r.kind == "absorbing" for r in s.receivers):
        resp = channel_response(s, model="shadowed")
        _check_response(resp, s)
        done += "+shadowed" + ("" if resp.model == "shadowed" else f"->{resp.model}")
    return f"accepted; {done} L={resp.hits.shape[2] - 1}"


def _text_case(case: dict) -> str:
    from capacity.scenario.load import load_scenario

    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "case.toml"
        path.write_text(case["toml"], errors="surrogatepass")
        load_scenario(path)
    return "accepted"


def _random_channel(case: dict) -> tuple[np.ndarray, np.ndarray | None, float | None]:
    rng = np.random.default_rng(case["seed"])
    w = rng.dirichlet(np.full(case["n_out"], case["conc"]), size=case["n_sym"])
    if case["truncate"]:
        w = w * rng.uniform(0.9, 1.0, (case["n_sym"], 1))
    if case["hostile"]:
        pick = rng.integers(4)
        if pick == 0:
            w[rng.integers(case["n_sym"]), 0] = rng.choice([np.nan, np.inf, -0.1])
        elif pick == 1:
            w[rng.integers(case["n_sym"])] = 0.0
        elif pick == 2:
            w = w * 1e-300
        else:
            w = np.repeat(w[:1], case["n_sym"], axis=0)  # identical rows: capacity 0
    cost = rng.uniform(0, 10, case["n_sym"]) if case["cost"] else None
    budget = None
    if cost is not None and case["budget_frac"] != 0.0:
        budget = float(cost.min() + case["budget_frac"] * (cost.mean() - cost.min()))
    return w, cost, budget


def _ba_case(case: dict) -> str:
    from capacity.information.blahut_arimoto import blahut_arimoto

    w, cost, budget = _random_channel(case)
    res = blahut_arimoto(w, cost=cost, budget=budget, tol=case["tol"])
    p = np.asarray(res.input_distribution)
    top = math.log2(w.shape[0]) if w.shape[0] > 1 else 0.0
    if not (math.isfinite(res.capacity) and math.isfinite(res.gap)):
        raise Breach(f"non-finite capacity or gap: {res.capacity}, {res.gap}")
    if res.capacity < -ROUND or res.capacity > top + ROUND:
        raise Breach(f"capacity {res.capacity} outside [0, log2 S = {top}]")
    if res.gap < 0:
        raise Breach(f"negative gap {res.gap}")
    if not (np.all(p >= -ROUND) and abs(p.sum() - 1) <= 1e-9):
        raise Breach("input law not a probability vector")
    if budget is not None and res.converged and cost is not None and p @ cost > budget * (1 + 1e-9) + 1e-12:
        raise Breach(f"mean cost {p @ cost} above budget {budget}")
    return f"C={res.capacity:.6g} gap={res.gap:.1e} converged={res.converged}"


def _poisson_case(case: dict) -> str:
    from capacity.channel.transition import poisson_transition

    rng = np.random.default_rng(case["seed"])
    means = rng.uniform(0, 1, (case["n_sym"], case["n_recv"])) * case["scale"]
    if case["hostile"]:
        means[0, 0] = rng.choice([np.nan, np.inf, -1.0, 1e308])
    t = poisson_transition(means, tol=case["tol"])
    m = np.asarray(t.matrix)
    if not np.all(np.isfinite(m)) or m.min() < -ROUND or m.max() > 1 + ROUND:
        raise Breach("transition entries outside [0, 1] or not finite")
    total = m.sum(axis=1) + np.asarray(t.truncated_mass)
    if np.any(np.abs(total - 1) > 1e-8):
        raise Breach(f"row + truncated mass != 1 (off by {np.abs(total - 1).max():.2e})")
    if np.any(np.asarray(t.truncated_mass) > case["tol"] * (1 + 1e-6) + 1e-15):
        raise Breach(f"truncated mass {np.max(t.truncated_mass):.3g} above tol {case['tol']}")
    return f"{m.shape[1]} outputs"


def _lone_case(case: dict) -> str:
    from capacity.physics.lone import lone_hits

    rng = np.random.default_rng(case["seed"])
    length = case["length"]
    centres = rng.uniform(-10, 10, (case["n_r"], 3)) * length
    radii = rng.uniform(0.2, 1.0, case["n_r"]) * length
    emitters = []
    for _ in range(case["n_e"]):  # every emitter outside every sphere (the documented precondition)
        j = rng.integers(case["n_r"])
        direction = rng.normal(size=3)
        direction /= np.linalg.norm(direction)
        emitters.append(centres[j] + direction * radii[j] * (1 + case["gap"]))
    emitters = np.array(emitters)
    inside = np.linalg.norm(emitters[:, None, :] - centres[None], axis=2) <= radii[None] * (1 + 1e-9)
    if inside.any():
        return "skipped: emitter inside another sphere"
    passive = rng.random(case["n_r"]) < 0.4
    offsets = rng.uniform(0, 1, case["n_r"]) * case["interval"]
    hits, tail = lone_hits(emitters, centres, radii, passive, offsets, case["diffusion"], case["degradation"],
                           case["interval"], case["memory"])
    hits, tail = np.asarray(hits), np.asarray(tail)
    if not (np.all(np.isfinite(hits)) and np.all(np.isfinite(tail))):
        raise Breach("non-finite lone hit probability or tail")
    if (hits.min() < -ROUND or hits.max() > 1 + ROUND or tail.min() < -ROUND
            or tail[:, ~passive].max(initial=0.0) > 1 + ROUND):  # passive tails count later visits: may exceed 1
        raise Breach(f"lone probability outside [0, 1]: hits [{hits.min():.3g}, {hits.max():.3g}], "
                     f"tail [{tail.min():.3g}, {tail.max():.3g}]")
    totals = hits.sum(axis=2) + tail
    if np.any(totals[:, ~passive] > 1 + 1e-6):
        raise Breach(f"lone absorbing pair total above 1: {totals[:, ~passive].max():.6g}")
    return "ok"


CASE_RUNNERS = {"scenario": _scenario_case, "scenario_text": _text_case, "blahut_arimoto": _ba_case,
                "poisson_transition": _poisson_case, "lone_hits": _lone_case}


def _run_cli(case: dict, limit: float) -> dict:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "case.toml"
        path.write_text(case["toml"])
        cmd = [sys.executable, "-m", "capacity.cli", case["command"], str(path)]
        if case["command"] == "response":
            cmd += ["--model", "lone", "--json"]
        try:
            proc = subprocess.run(cmd, capture_output=True, text=True, timeout=limit, cwd=folder)
        except subprocess.TimeoutExpired:
            return {"status": "finding", "detail": f"time-out: over {limit:.0f} s"}
    err = proc.stderr
    if "Traceback" in err:
        return {"status": "finding", "detail": f"traceback, exit {proc.returncode}: {err.strip().splitlines()[-1]}",
                "traceback": err[-3000:]}
    if proc.returncode == 2:
        lines = [ln for ln in err.splitlines() if ln.strip()]
        if len(lines) != 1 or "error:" not in lines[0] or "Fix:" not in lines[0]:
            return {"status": "finding", "detail": f"exit 2 without a one-line error naming a fix: {err[-500:]}"}
        return {"status": "input_error", "detail": lines[0][:200]}
    if proc.returncode != 0:
        return {"status": "finding", "detail": f"exit {proc.returncode}: {err[-500:]}"}
    if "Warning" in err:
        return {"status": "finding", "detail": f"a Python warning reached stderr: {err[-500:]}"}
    if case["command"] == "response":
        try:
            out = json.loads(proc.stdout)
        except json.JSONDecodeError:
            return {"status": "finding", "detail": "response --json printed no valid JSON"}
        text = json.dumps(out)
        if "NaN" in text or "Infinity" in text:
            return {"status": "finding", "detail": "NaN or Infinity in response --json output"}
    return {"status": "ok", "detail": f"exit 0 ({case['command']})"}


# ----------------------------------------------------------------------------------------- worker
def _worker(conn) -> None:
    os.environ.setdefault("JAX_ENABLE_X64", "1")
    import capacity  # noqa: F401

    while True:
        case = conn.recv()
        if case is None:
            return
        conn.send({"status": "ready"} if case == "ping" else _run_library(case))


class Worker:
    """A child process that runs library cases; restarted after a time-out."""

    def __init__(self):
        self.ctx = mp.get_context("spawn")
        self.proc = None
        self.conn = None

    def _start(self):
        parent, child = self.ctx.Pipe()
        self.proc = self.ctx.Process(target=_worker, args=(child,), daemon=True)
        self.proc.start()
        self.conn = parent
        parent.send("ping")  # wait for the imports, so that they do not count against the next case's limit
        parent.poll(600)
        parent.recv()

    def run(self, case: dict, limit: float) -> dict:
        if self.proc is None or not self.proc.is_alive():
            self._start()
        self.conn.send(case)
        if self.conn.poll(limit):
            try:
                return self.conn.recv()
            except EOFError:
                pass
        else:
            self.stop()
            return {"status": "finding", "detail": f"time-out: over {limit:.0f} s"}
        code = self.proc.exitcode
        self.stop()
        return {"status": "finding", "detail": f"worker died (exit code {code})"}

    def stop(self):
        if self.proc is not None:
            if self.proc.is_alive():
                self.proc.kill()
            self.proc.join(5)
        self.proc = None


# ----------------------------------------------------------------------------------------- driver
def _signature(kind: str, detail: str) -> str:
    return kind + ": " + re.sub(r"[-+]?\d[\d.e+-]*", "#", detail.split("\n")[0])[:160]


def fuzz(minutes: float, seed: int, out: Path) -> dict:
    rng = np.random.default_rng(seed)
    names, weights = list(KINDS), np.array(list(KINDS.values()))
    worker = Worker()
    deadline = time.monotonic() + 60.0 * minutes
    counts: dict[str, dict[str, int]] = {k: {"ok": 0, "input_error": 0, "finding": 0} for k in names}
    findings: dict[str, dict] = {}
    started = time.time()
    n = 0
    while time.monotonic() < deadline:
        kind = names[rng.choice(len(names), p=weights / weights.sum())]
        case_seed = int(rng.integers(2**31))
        case = make_case(kind, case_seed)
        t = time.monotonic()
        outcome = _run_cli(case, LIMIT_S[kind]) if kind == "cli" else worker.run(case, LIMIT_S[kind])
        took = time.monotonic() - t
        counts[kind][outcome["status"]] += 1
        n += 1
        if outcome["status"] == "finding":
            sig = _signature(kind, outcome["detail"])
            entry = findings.setdefault(sig, {"kind": kind, "detail": outcome["detail"], "count": 0,
                                              "replay": f"python benchmarks/fuzz.py --replay {kind}:{case_seed}",
                                              "ops": case.get("ops"), "source": case.get("source"),
                                              "toml": case.get("toml", "")[:4000],
                                              "traceback": outcome.get("traceback", "")})
            entry["count"] += 1
            print(f"[{n}] FINDING {kind}:{case_seed} {outcome['detail'][:150]}", flush=True)
        elif n % 25 == 0:
            print(f"[{n}] {kind} {outcome['status']} ({took:.1f} s)", flush=True)
    worker.stop()
    report = {"seed": seed, "minutes": minutes, "started": time.strftime("%Y-%m-%d %H:%M:%S",
                                                                          time.localtime(started)),
              "cases": n, "cases_per_kind": {k: sum(v.values()) for k, v in counts.items()},
              "outcomes_per_kind": counts, "findings": list(findings.values()),
              "limits_s": LIMIT_S, "load_average_at_end": list(os.getloadavg())}
    out.mkdir(parents=True, exist_ok=True)
    (out / "report.json").write_text(json.dumps(report, indent=2) + "\n")
    (out / "report.md").write_text(_markdown(report))
    return report


def _markdown(report: dict) -> str:
    lines = [f"# Fuzz report (seed {report['seed']}, {report['minutes']:g} minutes, started {report['started']})",
             "", f"Cases run: {report['cases']}; distinct findings: {len(report['findings'])}.", "",
             "| kind | cases | clean result | InputError | finding |", "|---|---:|---:|---:|---:|"]
    for k, v in report["outcomes_per_kind"].items():
        lines.append(f"| {k} | {sum(v.values())} | {v['ok']} | {v['input_error']} | {v['finding']} |")
    lines.append("")
    if not report["findings"]:
        lines.append("No findings: every case gave a result within the invariants or an InputError naming a field.")
    for i, f in enumerate(report["findings"], 1):
        lines += [f"## {i}. {f['kind']}: {f['detail'][:200]}", "", f"Seen {f['count']} times. Reproduce: "
                  f"`{f['replay']}`", f"Mutations: {f['ops']} (from {f['source']})" if f.get("ops") else "", ""]
        if f.get("toml"):
            lines += ["```toml", f["toml"][:1500], "```", ""]
    return "\n".join(lines) + "\n"


def replay(spec: str) -> int:
    kind, seed = spec.split(":")
    case = make_case(kind, int(seed))
    print(json.dumps({k: v for k, v in case.items() if k not in ("data",)}, indent=1, default=str)[:3000])
    outcome = _run_cli(case, LIMIT_S[kind]) if kind == "cli" else _run_library(case)
    print(json.dumps(outcome, indent=1))
    return 0


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--minutes", type=float, default=10.0, help="time budget (default 10)")
    parser.add_argument("--seed", type=int, default=1, help="seed of the case sequence (default 1)")
    parser.add_argument("--out", type=Path, default=ROOT / "results" / "fuzz", help="report folder")
    parser.add_argument("--replay", metavar="KIND:SEED", help="run one case and print its outcome")
    args = parser.parse_args(argv)
    if args.replay:
        return replay(args.replay)
    report = fuzz(args.minutes, args.seed, args.out)
    print(f"{report['cases']} cases, {len(report['findings'])} distinct findings; wrote {args.out}/report.md")
    return 0


if __name__ == "__main__":
    sys.exit(main())
