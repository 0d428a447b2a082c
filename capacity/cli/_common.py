"""Helpers shared by the sub-command modules: loading, JSON writing, overrides."""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np

SAFETY = (
    "Design-stage estimate only: not validated for clinical, biosafety or environmental-release decisions; "
    "defer those to local regulation and licensed practice."
)


def add_scenario_argument(parser) -> None:
    parser.add_argument(
        "scenario",
        metavar="SCENARIO",
        help="scenario file (TOML), or the name of a built-in scenario ('demo')",
    )
    parser.add_argument("--strict", action="store_true",
                        help="treat the scenario's warnings (suspicious geometry, values whose size suggests a unit "
                             "slip) as errors: exit status 2 (notes about renamed keys do not count)")


def demo_path() -> Path:
    """Path of the built-in demo scenario file."""
    from capacity.scenario.load import builtin_path

    return builtin_path("demo")


def load(path_or_demo: str, *, strict: bool = False, announce: bool = True):
    """Load a scenario file, or a built-in one by name (as :func:`capacity.load_scenario`), and deal with its
    warnings and deprecation notes: printed once on stderr (``announce``); ``strict`` turns the warnings (doubts
    about the physics or the units) into an :class:`InputError`, but not the deprecation notes (an old key name,
    :data:`capacity.scenario.load.RENAMED`, reads to the same scenario)."""
    import sys

    scenario, notes, warnings = load_noted(path_or_demo, strict=strict)
    if announce:
        for note in notes:
            print(f"note: {note}", file=sys.stderr)
        for w in warnings:
            print(f"warning: {w}", file=sys.stderr)
    return scenario


def load_noted(path_or_demo: str, *, strict: bool = False):
    """``(scenario, deprecation notes, warnings)`` of a scenario file, nothing printed; with ``strict`` a
    scenario with warnings raises :class:`InputError` (deprecation notes never do)."""
    import warnings as py_warnings

    from capacity.errors import InputError
    from capacity.scenario.load import ScenarioKeyWarning, load_scenario
    from capacity.scenario.summary import scenario_warnings

    with py_warnings.catch_warnings(record=True) as caught:
        py_warnings.simplefilter("always", ScenarioKeyWarning)
        scenario = load_scenario(path_or_demo)
    notes = [str(w.message) for w in caught if issubclass(w.category, ScenarioKeyWarning)]
    for w in caught:  # any other warning goes on as if it had not been caught
        if not issubclass(w.category, ScenarioKeyWarning):
            py_warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    warnings = scenario_warnings(scenario)
    if warnings and strict:
        raise InputError("--strict", path_or_demo, f"the scenario has {len(warnings)} warning(s): "
                         + "; ".join(warnings), "fix the values named, or drop --strict")
    return scenario, notes, warnings


def to_jsonable(obj):
    """Convert numpy/jax arrays and scalars (recursively) to plain JSON types; non-finite floats become None."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if hasattr(obj, "tolist") and not isinstance(obj, (str, bytes)):
        return to_jsonable(np.asarray(obj).tolist())
    if isinstance(obj, (np.floating, float)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    return obj


#: version of the JSON documents the commands write (top-level key ``schema``); raised when a key is renamed or
#: removed. 2: ``single_slot_*`` (was ``isi_free_*``), ``certified_gap`` (was ``gap`` in rate records), ``units``
#: an object everywhere, ``bits_per_symbol`` beside ``bits_per_second`` and ``bits_per_molecule``.
SCHEMA = 2


def dump_json(data, path: str | os.PathLike | None = None) -> str:
    """JSON text of ``data`` (a top-level dict gets the ``schema`` key first); written to ``path`` if given."""
    if isinstance(data, dict) and "schema" not in data:
        data = {"schema": SCHEMA, **data}
    text = json.dumps(to_jsonable(data), indent=2)
    if path is not None:
        Path(path).parent.mkdir(parents=True, exist_ok=True)
        Path(path).write_text(text + "\n")
    return text


def fmt(x: float, digits: int = 4) -> str:
    """Compact number formatting for tables."""
    if x is None or not np.isfinite(x):
        return "-"
    if x == 0:
        return "0"
    if 1e-3 <= abs(x) < 1e5:
        return f"{x:.{digits}g}"
    return f"{x:.{max(digits - 1, 1)}e}"


def add_effort_arguments(parser) -> None:
    """--precision, --full, --symbols, --runs: how much simulation the rates with ISI get."""
    group = parser.add_argument_group("precision of the simulated rates")
    group.add_argument("--precision", type=float, metavar="REL",
                       help="target relative standard error of the simulated rates: batches of runs are added "
                            "until it is met (default 0.005, i.e. 0.5 %%, enough for two significant digits)")
    group.add_argument("--full", action="store_true",
                       help="the long settings used for committed results (20000 symbols x 8 runs, trellis up to "
                            "4096 states, 4096 windowed-bound samples); slower, tighter brackets")
    group.add_argument("--symbols", type=int, metavar="N",
                       help="symbols per run of the forward recursion (default 2500, or 20000 with --full)")
    group.add_argument("--runs", type=int, metavar="K",
                       help="independent runs per batch; the standard error comes from their spread (default 8)")


def effort_of(args):
    """The :class:`capacity.effort.Effort` the effort arguments ask for (named errors for bad values)."""
    from capacity.effort import effort
    from capacity.errors import InputError

    for option, value, low in (("--symbols", args.symbols, 1), ("--runs", args.runs, 2)):
        if value is not None and value < low:
            raise InputError(option, value, f"must be at least {low}", f"use e.g. {option} {max(low, 8)}")
    # --precision is checked (under its option name) by capacity.effort.effort
    return effort("full" if args.full else "quick", n_symbols=args.symbols, n_runs=args.runs,
                  precision=args.precision, max_rounds=None if args.precision is None else 8)


#: command-line option -> (scenario section, field) it overrides
OVERRIDES = {"--budget": ("signalling", "budget"), "--particle-count": ("channel", "particle_count"),
             "--seed": ("channel", "seed")}


def apply_overrides(scenario, args):
    """The scenario with the command-line overrides of :data:`OVERRIDES` present in ``args`` applied and validated
    before any computation; a bad value is reported under the option's name (``--budget``), not the scenario
    field's."""
    from capacity.errors import InputError
    from capacity.scenario.validate import validate_scenario

    for option, (section, field) in OVERRIDES.items():
        value = getattr(args, option[2:].replace("-", "_"), None)
        if value is None:
            continue
        changed = (scenario.with_signalling if section == "signalling" else scenario.with_channel)(**{field: value})
        try:
            validate_scenario(changed)
        except InputError as exc:
            if exc.field == f"{section}.{field}":
                raise InputError(option, value, exc.problem, exc.fix.replace(f"{section}.{field}", option)) from None
            raise
        scenario = changed
    return scenario


PLOT_FORMATS = (".png", ".pdf", ".svg")


def check_plot_path(path: str) -> None:
    """Refuse a plot file name with an unknown extension before any computation (named error, exit 2)."""
    from capacity.errors import InputError

    if Path(path).suffix.lower() not in PLOT_FORMATS:
        raise InputError("--plot", path, f"unknown plot format {Path(path).suffix or '(none)'}",
                         f"end the file name with one of {', '.join(PLOT_FORMATS)}")


class status:
    """A one-line note on stderr while a step runs (``with status("computing ...", quiet):``), only when stderr is
    a terminal; erased when the step ends."""

    def __init__(self, message: str, quiet: bool = False):
        import sys

        self.stream = sys.stderr
        self.message = message
        self.show = not quiet and self.stream.isatty()

    def __enter__(self):
        if self.show:
            self.stream.write(f"{self.message} ...")
            self.stream.flush()
        return self

    def __exit__(self, *exc):
        if self.show:
            self.stream.write("\r" + " " * (len(self.message) + 4) + "\r")
            self.stream.flush()
        return False
