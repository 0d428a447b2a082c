"""capacity: how much information a diffusion-based molecular communication layout can carry.

(The public API index is completed as the stages land.)
"""

from capacity import _jax  # noqa: F401  (float64 everywhere)
from capacity.errors import InputError
from capacity.information.result import CapacityResult, RateResult
from capacity.physics.result import ChannelResponse
from capacity.scenario.types import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.schemes.alphabet import Alphabet

__all__ = [
    "Alphabet",
    "CapacityResult",
    "Channel",
    "ChannelResponse",
    "Emitter",
    "InputError",
    "Medium",
    "RateResult",
    "Receiver",
    "Scenario",
    "Signalling",
]
