"""capacity: how much information a diffusion-based molecular communication layout can carry.

Using the package switches JAX to float64 (names are imported on first use). All quantities are SI inside;
information is in bits.

Scenario (``capacity.scenario``)
    Scenario, Medium, Emitter, Receiver, Channel, Signalling — immutable dataclasses (SI units)
    load_scenario(path), scenario_from_dict(data) — TOML / dict -> validated Scenario
    summarise(scenario) — distances, gaps, lone capture, peak times, warnings
Physics (``capacity.physics``)
    channel_response(scenario, model=None) -> ChannelResponse(hits (E,R,L+1), tail (E,R), stderr, model, ...)
    lone_hits, shadowed_hits, simulate_hits — the three response models on plain arrays
Channel and information (``capacity.channel``, ``capacity.information``)
    symbol_means, poisson_transition, binomial_transition — memoryless transition laws
    blahut_arimoto(transition, cost=None, budget=None, tol=1e-9) -> CapacityResult (certified gap)
    capacity_cost_curve, capacity_per_unit_cost, mutual_information
    information_rate(hits, background, symbols, input_law) -> RateResult (forward recursion with ISI)
    isi_bounds(...) -> {"sbs", "dfe", "mf"}; markov_rate(...); mc_mutual_information(...)
Schemes (``capacity.schemes``)
    Alphabet, build_alphabet(signalling, n_emitters); DETECTORS, detector_performance(...)
Whole-link answers
    link_rates(scenario, response, alphabet) -> LinkRates; compare_schemes, budget_sweep
Design (``capacity.design``)
    optimise_design(scenario, tune, objective) -> DesignResult
"""

import os as _os

# float64 everywhere: JAX reads this when it is first imported (every module that uses JAX also imports
# capacity._jax, which switches it on explicitly in case JAX was imported before this package)
_os.environ.setdefault("JAX_ENABLE_X64", "1")

# public name -> module; imported on first use, so that the command line's --help and argument errors do not
# wait for JAX (PEP 562 module __getattr__)
_LAZY = {
    "Transition": "capacity.channel.transition",
    "binomial_transition": "capacity.channel.transition",
    "poisson_transition": "capacity.channel.transition",
    "symbol_means": "capacity.channel.transition",
    "budget_sweep": "capacity.compare",
    "compare_schemes": "capacity.compare",
    "DesignResult": "capacity.design.optimise",
    "optimise_design": "capacity.design.optimise",
    "InputError": "capacity.errors",
    "blahut_arimoto": "capacity.information.blahut_arimoto",
    "capacity_cost_curve": "capacity.information.blahut_arimoto",
    "mutual_information": "capacity.information.blahut_arimoto",
    "isi_bounds": "capacity.information.bounds",
    "markov_rate": "capacity.information.markov",
    "mc_mutual_information": "capacity.information.montecarlo",
    "CapacityResult": "capacity.information.result",
    "RateResult": "capacity.information.result",
    "information_rate": "capacity.information.trellis",
    "capacity_per_unit_cost": "capacity.information.unit_cost",
    "lone_hits": "capacity.physics.lone",
    "simulate_hits": "capacity.physics.particles",
    "channel_response": "capacity.physics.response",
    "ChannelResponse": "capacity.physics.result",
    "shadowed_hits": "capacity.physics.shadowed",
    "LinkRates": "capacity.rates",
    "link_rates": "capacity.rates",
    "load_scenario": "capacity.scenario.load",
    "scenario_from_dict": "capacity.scenario.load",
    "summarise": "capacity.scenario.summary",
    "Channel": "capacity.scenario.types",
    "Emitter": "capacity.scenario.types",
    "Medium": "capacity.scenario.types",
    "Receiver": "capacity.scenario.types",
    "Scenario": "capacity.scenario.types",
    "Signalling": "capacity.scenario.types",
    "Alphabet": "capacity.schemes.alphabet",
    "build_alphabet": "capacity.schemes.builders",
    "DETECTORS": "capacity.schemes.detectors",
    "detector_performance": "capacity.schemes.detectors",
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        from capacity import _jax  # noqa: F401  (float64)

        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'capacity' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))


__all__ = [
    "DETECTORS", "Alphabet", "CapacityResult", "Channel", "ChannelResponse", "DesignResult", "Emitter",
    "InputError", "LinkRates", "Medium", "RateResult", "Receiver", "Scenario", "Signalling", "Transition",
    "binomial_transition", "blahut_arimoto", "budget_sweep", "build_alphabet", "capacity_cost_curve",
    "capacity_per_unit_cost", "channel_response", "compare_schemes", "detector_performance", "information_rate",
    "isi_bounds", "link_rates", "load_scenario", "lone_hits", "markov_rate", "mc_mutual_information",
    "mutual_information", "optimise_design", "poisson_transition", "scenario_from_dict", "shadowed_hits",
    "simulate_hits", "summarise", "symbol_means",
]
__version__ = "0.1.0"
