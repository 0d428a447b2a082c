"""What a sweep computes at each point: one scenario and its seed in, a flat dict of named outputs out.

Three measures, each a small object in :data:`MEASURES`:

``rate``      :func:`capacity.link_rates` — the information rate with ISI, its standard error and bracket, per
              symbol, second and molecule.
``compare``   :func:`capacity.compare.compare_schemes` — the same per signalling scheme, the best scheme, and
              each scheme's best detector.
``response``  :func:`capacity.channel_response` — per emitter-receiver pair: total captured, release-slot
              probability, the slot of the peak; the memory kept and the largest tail.
``hits``      the same and every slot: the hit probability of each pair at each lag, its standard error
              (particle model; NaN for the others) and the tail; needs a whole-number ``channel.memory``.

``evaluate`` is what a worker runs: it never raises, it returns the outputs or the error text, with the
seconds taken.
"""

from __future__ import annotations

import time
import traceback

#: information outputs in bits per symbol (units of the others are in ``UNITS``)
_RATE_OUTPUTS = ("information_rate", "stderr", "lower_bound", "upper_bound", "bits_per_second",
                 "lower_bits_per_second", "upper_bits_per_second", "bits_per_molecule", "single_slot_capacity",
                 "mean_molecules", "memory", "model", "rate_method", "input_law", "lower_bound_method",
                 "upper_bound_method", "bracket_relative", "flag", "input_law_probabilities")
#: outputs added after stores were first written: a ``points.csv`` without them is upgraded in place (their
#: cells empty in its older rows) instead of refused, so earlier sweeps still resume
ADDED_OUTPUTS = ("input_law_probabilities",)
UNITS = {"information_rate": "bits/symbol", "stderr": "bits/symbol", "lower_bound": "bits/symbol",
         "upper_bound": "bits/symbol", "single_slot_capacity": "bits/symbol", "bits_per_second": "bits/s",
         "lower_bits_per_second": "bits/s", "upper_bits_per_second": "bits/s", "bits_per_molecule": "bits/molecule",
         "mean_molecules": "molecules/symbol", "memory": "lags", "seconds": "s", "cpu_seconds": "s",
         "bracket_relative": "1"}


def unit_of(output: str) -> str:
    """Unit of an output column (scheme- and pair-prefixed names take the unit of their suffix)."""
    for name in sorted(UNITS, key=len, reverse=True):
        if output == name or output.endswith("_" + name):
            return UNITS[name]
    if output.startswith(("captured_", "release_slot_", "peak_hits_", "tail_", "hits_")):
        return "probability"
    if output.startswith("peak_slot_"):
        return "slot"
    if output.endswith("_ser"):
        return "symbol errors/symbol"
    return ""


class RateMeasure:
    """Every rate of the scenario's own signalling scheme (as ``capacity rate``).

    ``input_law_probabilities`` is the input law the rates were computed at, (S,) probabilities over the
    alphabet's symbols in its order, as a JSON list (exact: floats as ``repr``). A setting ``candidate_laws``
    (name -> (S,) list; not among the defaults, so it enters only the ids of points that carry it) adds laws to
    the ones :func:`capacity.link_rates` chooses from (:mod:`capacity.sweep.carry` passes laws found at smaller
    budgets this way).
    """

    name = "rate"
    defaults = {"model": None, "n_symbols": 20_000, "n_runs": 8, "bound_samples": 20_000, "window_samples": 4096,
                "optimise_law": True}

    def outputs(self, scenario, settings) -> list[str]:
        return list(_RATE_OUTPUTS)

    def merits(self, outputs) -> list[str]:
        return [o for o in ("bits_per_second", "information_rate", "bits_per_molecule", "lower_bound",
                            "single_slot_capacity") if o in outputs]

    def panels(self, outputs) -> list:
        """Default line plots: [(y label, [(output, lower or None, upper or None, legend), ...]), ...]."""
        return [("bits per symbol", [("information_rate", "lower_bound", "upper_bound", "rate with ISI")]),
                ("bits per second", [("bits_per_second", "lower_bits_per_second", "upper_bits_per_second",
                                      "rate with ISI")])]

    def __call__(self, scenario, settings, seed) -> dict:
        from capacity.physics.response import channel_response
        from capacity.rates import link_rates
        from capacity.schemes.builders import build_alphabet

        response = channel_response(scenario, settings["model"], seed=seed)
        alphabet = build_alphabet(scenario.signalling, len(scenario.emitters))
        candidates = _candidate_laws(settings.get("candidate_laws"), len(alphabet.labels))
        rates = link_rates(scenario, response, alphabet, n_symbols=settings["n_symbols"], n_runs=settings["n_runs"],
                           bound_samples=settings["bound_samples"], window_samples=settings["window_samples"],
                           optimise_law=settings["optimise_law"], candidate_laws=candidates, seed=seed)
        return rate_outputs(rates, response)


def _candidate_laws(given, n_symbols: int) -> dict | None:
    """The ``candidate_laws`` setting checked: name -> (S,) non-negative probabilities of this alphabet."""
    if not given:
        return None
    import numpy as np

    from capacity.errors import InputError

    out = {}
    for name, law in dict(given).items():
        arr = np.asarray(law, dtype=float)
        if arr.shape != (n_symbols,) or not np.all(np.isfinite(arr)) or np.any(arr < 0) or arr.sum() <= 0:
            raise InputError("candidate_laws", name, f"is not a law on this alphabet's {n_symbols} symbols "
                             f"(shape {arr.shape})", "give non-negative weights, one per symbol of the scheme")
        out[str(name)] = arr
    return out


def rate_outputs(rates, response) -> dict:
    """The rate measure's columns from a :class:`capacity.LinkRates` and its response (``flag``: why the bracket
    misses its target, as in ``capacity compare``'s CSV)."""
    import json

    import numpy as np

    from capacity.compare import bracket_flag

    ts = rates.symbol_interval
    r = rates.information_rate
    d = rates.to_dict()
    rel = d["bracket_relative"]
    return {"input_law": rates.law_choice, "lower_bound_method": rates.lower_bound_method,
            "upper_bound_method": rates.upper_bound_method,
            "bracket_relative": float("nan") if rel is None else float(rel), "flag": bracket_flag(d),
            "information_rate": float(r.rate), "stderr": float(r.stderr), "lower_bound": rates.lower_bound,
            "upper_bound": rates.upper_bound, "bits_per_second": float(r.rate) / ts,
            "lower_bits_per_second": rates.lower_bound / ts, "upper_bits_per_second": rates.upper_bound / ts,
            "bits_per_molecule": rates.per_molecule(r.rate), "single_slot_capacity": float(rates.isi_free.capacity),
            "mean_molecules": rates.mean_molecules, "memory": response.memory, "model": response.model,
            "rate_method": r.method,
            "input_law_probabilities": json.dumps([float(v) for v in np.asarray(rates.iid_input, dtype=float)])}


class CompareMeasure:
    """Each signalling scheme at the same budget (as ``capacity compare``): rates and the best detector."""

    name = "compare"
    defaults = {"model": None, "n_symbols": 10_000, "n_runs": 4, "schemes": None}
    #: per scheme: the columns of ``capacity compare``'s CSV (after scheme and budget), then its best detector
    #: (lowest symbol error rate) with that error rate and its hard-decision rate (bits/symbol)
    _PER = ("information_rate", "stderr", "lower_bound", "upper_bound", "bits_per_second", "bits_per_molecule",
            "single_slot_capacity", "mean_molecules", "certified_gap", "rate_method", "input_law",
            "lower_bound_method", "upper_bound_method", "bracket_relative", "flag", "best_detector",
            "best_detector_ser", "best_detector_rate")
    _RECORD = _PER[:-3]

    def schemes(self, scenario, settings) -> list[str]:
        from capacity.compare import applicable_schemes

        return applicable_schemes(scenario, settings["schemes"])

    def outputs(self, scenario, settings) -> list[str]:
        out = [f"{s}_{k}" for s in self.schemes(scenario, settings) for k in self._PER]
        return out + ["best_scheme", "best_bits_per_second", "model"]

    def merits(self, outputs) -> list[str]:
        return ["best_bits_per_second"] + [o for o in outputs if o.endswith("_bits_per_second")
                                           and o != "best_bits_per_second"]

    def panels(self, outputs) -> list:
        schemes = [o[: -len("_information_rate")] for o in outputs if o.endswith("_information_rate")]
        return [("bits per symbol", [(f"{s}_information_rate", f"{s}_lower_bound", f"{s}_upper_bound", s)
                                     for s in schemes]),
                ("bits per second", [(f"{s}_bits_per_second", None, None, s) for s in schemes])]

    def __call__(self, scenario, settings, seed) -> dict:
        from capacity.compare import compare_schemes
        from capacity.physics.response import channel_response

        response = channel_response(scenario, settings["model"], seed=seed)
        records = compare_schemes(scenario, response, settings["schemes"], n_symbols=settings["n_symbols"],
                                  n_runs=settings["n_runs"], detector_symbols=settings["n_symbols"], seed=seed)
        out = {"model": response.model}
        for rec in records:
            s = rec["scheme"]
            for k in self._RECORD:
                out[f"{s}_{k}"] = float("nan") if rec[k] is None else rec[k]
            tried = [d for d in rec["detectors"] if d.get("symbol_error_rate") is not None]
            best = min(tried, key=lambda d: d["symbol_error_rate"]) if tried else None
            out[f"{s}_best_detector"] = best["name"] if best else ""
            out[f"{s}_best_detector_ser"] = best["symbol_error_rate"] if best else float("nan")
            out[f"{s}_best_detector_rate"] = best["rate"] if best else float("nan")
        top = max(records, key=lambda r: r["bits_per_second"])
        out["best_scheme"] = top["scheme"]
        out["best_bits_per_second"] = top["bits_per_second"]
        return out


class ResponseMeasure:
    """The channel response alone (as ``capacity response``): cheap, for layout scans."""

    name = "response"
    defaults = {"model": None}

    def outputs(self, scenario, settings) -> list[str]:
        pairs = [f"e{i}_r{j}" for i in range(len(scenario.emitters)) for j in range(len(scenario.receivers))]
        per = [f"{k}_{p}" for p in pairs for k in ("captured", "release_slot", "peak_slot", "peak_hits")]
        return per + ["captured_total", "tail_max", "memory", "model"]

    def merits(self, outputs) -> list[str]:
        return ["captured_total"]

    def panels(self, outputs) -> list:
        return [("probability captured", [(o, None, None, o[len("captured_"):]) for o in outputs
                                          if o.startswith("captured_e")])]

    def __call__(self, scenario, settings, seed) -> dict:
        from capacity.physics.response import channel_response

        return self.summary(channel_response(scenario, settings["model"], seed=seed))

    @staticmethod
    def summary(response) -> dict:
        """The measure's columns of one :class:`capacity.ChannelResponse`."""
        import numpy as np

        hits, tail = np.asarray(response.hits), np.asarray(response.tail)
        out = {}
        for i in range(hits.shape[0]):
            for j in range(hits.shape[1]):
                p = f"e{i}_r{j}"
                out[f"captured_{p}"] = float(hits[i, j].sum() + tail[i, j])
                out[f"release_slot_{p}"] = float(hits[i, j, 0])
                out[f"peak_slot_{p}"] = int(np.argmax(hits[i, j]))
                out[f"peak_hits_{p}"] = float(hits[i, j].max())
        out["captured_total"] = float(hits.sum() + tail.sum())
        out["tail_max"] = float(tail.max())
        out["memory"] = response.memory
        out["model"] = response.model
        return out


class HitsMeasure(ResponseMeasure):
    """The whole response, slot by slot (for comparing models point by point, e.g. shadowed against particles):
    the ``response`` columns, then ``hits_e{i}_r{j}_l{l}`` (probability of a hit in slot l after a release of
    emitter i at receiver j), ``hits_se_e{i}_r{j}_l{l}`` (its standard error: particle model only, else NaN) and
    ``tail_e{i}_r{j}`` (probability of arriving after slot L)."""

    name = "hits"

    def outputs(self, scenario, settings) -> list[str]:
        from capacity.errors import InputError

        memory = scenario.channel.memory
        if isinstance(memory, str) or isinstance(memory, bool):
            raise InputError("channel.memory", memory, "--measure hits stores every slot, so the number of slots "
                             "must be known before the sweep starts", "give a whole number of lags, e.g. memory = "
                             "12 (or use --measure response)")
        pairs = [f"e{i}_r{j}" for i in range(len(scenario.emitters)) for j in range(len(scenario.receivers))]
        slots = [f"{k}_{p}_l{lag}" for k in ("hits", "hits_se") for p in pairs for lag in range(int(memory) + 1)]
        return super().outputs(scenario, settings) + slots + [f"tail_{p}" for p in pairs]

    def __call__(self, scenario, settings, seed) -> dict:
        import numpy as np

        from capacity.physics.response import channel_response

        response = channel_response(scenario, settings["model"], seed=seed)
        out = self.summary(response)
        hits, tail = np.asarray(response.hits), np.asarray(response.tail)
        se = np.full(hits.shape, np.nan) if response.stderr is None else np.asarray(response.stderr)
        for i in range(hits.shape[0]):
            for j in range(hits.shape[1]):
                p = f"e{i}_r{j}"
                for lag in range(hits.shape[2]):
                    out[f"hits_{p}_l{lag}"] = float(hits[i, j, lag])
                    out[f"hits_se_{p}_l{lag}"] = float(se[i, j, lag])
                out[f"tail_{p}"] = float(tail[i, j])
        return out


MEASURES = {m.name: m for m in (RateMeasure(), CompareMeasure(), ResponseMeasure(), HitsMeasure())}

_CONFIGURED = {}


def _configure(cache_dir: str | None) -> None:
    """Once per process: JAX's persistent compilation cache in ``cache_dir`` (workers then compile each
    function once per machine instead of once per process; the numbers do not change)."""
    if _CONFIGURED.get("cache") == cache_dir:
        return
    from capacity import _jax  # noqa: F401  (float64)

    if cache_dir:
        import jax

        jax.config.update("jax_compilation_cache_dir", cache_dir)
        jax.config.update("jax_persistent_cache_min_compile_time_secs", 0.0)
        jax.config.update("jax_persistent_cache_min_entry_size_bytes", 0)
    _CONFIGURED["cache"] = cache_dir


def evaluate(scenario, measure: str, settings: dict, seed: int, cache_dir: str | None = None) -> dict:
    """Run one point; returns {"ok": True, "outputs": {...}, "seconds", "cpu_seconds"} (wall and CPU time of
    this process: far less CPU than wall means the core was shared) or {"ok": False, "error": text, ...}.

    Never raises (a worker's exception would otherwise only be seen as a failed future without context)."""
    started, cpu = time.perf_counter(), time.process_time()
    try:
        _configure(cache_dir)
        outputs = MEASURES[measure](scenario, settings, seed)
    except Exception as exc:  # recorded as a failed point; the sweep goes on
        from capacity.errors import InputError

        text = str(exc) if isinstance(exc, InputError) else (
            f"{type(exc).__name__}: {exc} | " + traceback.format_exc(limit=3).replace("\n", " ").strip())
        return {"ok": False, "error": text, "seconds": time.perf_counter() - started}
    return {"ok": True, "outputs": outputs, "seconds": time.perf_counter() - started,
            "cpu_seconds": time.process_time() - cpu}
