"""capacity: how much information a diffusion-based molecular communication layout can carry.

Importing the package switches JAX to float64. All quantities are SI inside; information is in bits.

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

from capacity import _jax  # noqa: F401  (float64 everywhere)
from capacity.channel.transition import Transition, binomial_transition, poisson_transition, symbol_means
from capacity.compare import budget_sweep, compare_schemes
from capacity.design.optimise import DesignResult, optimise_design
from capacity.errors import InputError
from capacity.information.blahut_arimoto import blahut_arimoto, capacity_cost_curve, mutual_information
from capacity.information.bounds import isi_bounds
from capacity.information.markov import markov_rate
from capacity.information.montecarlo import mc_mutual_information
from capacity.information.result import CapacityResult, RateResult
from capacity.information.trellis import information_rate
from capacity.information.unit_cost import capacity_per_unit_cost
from capacity.physics.lone import lone_hits
from capacity.physics.particles import simulate_hits
from capacity.physics.response import channel_response
from capacity.physics.result import ChannelResponse
from capacity.physics.shadowed import shadowed_hits
from capacity.rates import LinkRates, link_rates
from capacity.scenario.load import load_scenario, scenario_from_dict
from capacity.scenario.summary import summarise
from capacity.scenario.types import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.schemes.alphabet import Alphabet
from capacity.schemes.builders import build_alphabet
from capacity.schemes.detectors import DETECTORS, detector_performance

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
