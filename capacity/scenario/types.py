"""Immutable scenario objects, all quantities in SI units.

A :class:`Scenario` is what the loader returns and what every later stage takes. Construct them directly from
Python or with :func:`capacity.load_scenario`; validation lives in :mod:`capacity.scenario.validate`.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np

ReceiverKind = str  # "absorbing" | "passive" | "reactive"


@dataclass(frozen=True)
class Medium:
    """Unbounded 3-D fluid.

    diffusion : m^2/s, > 0.
    degradation : first-order degradation rate of the signalling molecule, 1/s, >= 0.
    flow : uniform flow velocity of the fluid, m/s, shape (3,) (default at rest).
    """

    diffusion: float
    degradation: float = 0.0
    flow: tuple[float, float, float] = (0.0, 0.0, 0.0)


@dataclass(frozen=True)
class Emitter:
    """A point source. ``position`` in metres, shape (3,).

    pulse : seconds, >= 0: the molecules of one release leave at uniformly spread times over ``[0, pulse]`` (a
        rectangular release); 0 (default) is an impulse at the start of the slot.
    """

    name: str
    position: tuple[float, float, float]
    pulse: float = 0.0


@dataclass(frozen=True)
class Wall:
    """A flat reflecting wall: the plane through ``point`` (m, shape (3,)) perpendicular to ``normal``.

    normal : any non-zero length (it is normalised); it points INTO the fluid, so emitters and receivers lie on
        the side it points to. kind : ``"reflecting"`` (molecules bounce off; the only kind).
    One wall bounds a half space; two parallel walls whose normals face each other form a channel.
    """

    point: tuple[float, float, float]
    normal: tuple[float, float, float]
    kind: str = "reflecting"


@dataclass(frozen=True)
class Receiver:
    """A sphere that counts molecules.

    centre : metres, shape (3,).
    radius : metres, > 0.
    kind : ``"absorbing"`` (counts each molecule once, at first contact, and removes it) or ``"passive"``
        (counts the molecules inside the sphere at one instant per slot).
    sample_offset : passive receivers only: seconds from the start of a slot to the sampling instant,
        in (0, symbol_interval]; ``None`` means the end of the slot.
    reaction_rate : ``"reactive"`` receivers only: surface reaction rate kappa, m/s (> 0), in the Robin
        boundary condition ``D dc/dn = kappa c`` (a molecule that touches the sphere is taken with a probability
        that grows with kappa; kappa -> infinity is the absorbing sphere).
    """

    name: str
    centre: tuple[float, float, float]
    radius: float
    kind: ReceiverKind = "absorbing"
    sample_offset: float | None = None
    reaction_rate: float | None = None


@dataclass(frozen=True)
class Channel:
    """How the responses are turned into a counting channel.

    symbol_interval : seconds, > 0 (slot length Ts).
    memory : number of lags kept exactly (L, so L+1 slots: lag 0..L), or ``"auto"``.
    memory_tolerance : for ``memory="auto"``: the smallest L such that every later slot's hit probability is at
        most this fraction of the pair's largest slot (dimensionless).
    background : mean stray counts per slot, one per receiver (tuple of length R), >= 0.
    counting : ``"poisson"`` or ``"binomial"``.
    residual : what happens to the mass counted after lag L: ``"interference"`` (added as mean interference)
        or ``"drop"``.
    response : default response model, ``"lone"`` | ``"shadowed"`` | ``"particles"``.
    particle_count : molecules simulated per emitter by the particle model (scenario files before this name
        said ``particles``, still read with a deprecation note).
    particle_step : base time step of the particle model in seconds, ``None`` for automatic (formerly
        ``time_step``).
    seed : integer seed for every random draw made for this scenario.
    """

    symbol_interval: float
    memory: int | str = "auto"
    memory_tolerance: float = 0.01
    background: tuple[float, ...] = ()
    counting: str = "poisson"
    residual: str = "interference"
    response: str = "shadowed"
    particle_count: int = 20000
    particle_step: float | None = None
    seed: int = 0


@dataclass(frozen=True)
class Signalling:
    """The signalling scheme and its molecule budget.

    scheme : ``"amplitude"`` | ``"spatial"`` | ``"multiplex"`` | ``"hybrid"``.
    levels : number of amplitude levels including 0 (2 = on-off keying).
    peak : largest release of one emitter in one slot, molecules (> 0).
    budget : mean molecules per symbol, all emitters together (> 0), or ``None`` for no mean constraint.
    emitter : for ``amplitude``: the index of the emitter that signals (default 0).
    silent : for ``spatial``/``hybrid``: whether "no emitter fires" is a symbol.
    amplitudes : explicit release levels (molecules), overriding ``levels``/``peak`` placement, or ``None``.
    """

    scheme: str = "amplitude"
    levels: int = 2
    peak: float = 1000.0
    budget: float | None = None
    emitter: int = 0
    silent: bool = True
    amplitudes: tuple[float, ...] | None = None


@dataclass(frozen=True)
class Scenario:
    """A whole layout: medium, emitters, receivers, channel settings and signalling scheme (SI units)."""

    name: str
    medium: Medium
    emitters: tuple[Emitter, ...]
    receivers: tuple[Receiver, ...]
    channel: Channel
    signalling: Signalling = field(default_factory=Signalling)
    walls: tuple[Wall, ...] = ()

    # -- convenient array views -------------------------------------------------------------------
    @property
    def emitter_positions(self) -> np.ndarray:
        """Emitter positions, metres, shape (E, 3)."""
        return np.asarray([e.position for e in self.emitters], dtype=float).reshape(-1, 3)

    @property
    def receiver_centres(self) -> np.ndarray:
        """Receiver centres, metres, shape (R, 3)."""
        return np.asarray([r.centre for r in self.receivers], dtype=float).reshape(-1, 3)

    @property
    def receiver_radii(self) -> np.ndarray:
        """Receiver radii, metres, shape (R,)."""
        return np.asarray([r.radius for r in self.receivers], dtype=float)

    @property
    def reaction_rates(self) -> np.ndarray:
        """Surface reaction rates, m/s, shape (R,): ``inf`` for absorbing receivers, the given rate for reactive
        ones, 0 for passive ones."""
        rates = {"absorbing": lambda r: np.inf, "reactive": lambda r: float(r.reaction_rate)}
        return np.asarray([rates.get(r.kind, lambda r: 0.0)(r) for r in self.receivers], dtype=float)

    @property
    def flow(self) -> np.ndarray:
        """Uniform flow velocity, m/s, shape (3,)."""
        return np.asarray(self.medium.flow, dtype=float).reshape(3)

    @property
    def emitter_pulses(self) -> np.ndarray:
        """Release durations, seconds, shape (E,) (0 = impulse)."""
        return np.asarray([e.pulse for e in self.emitters], dtype=float).reshape(-1)

    @property
    def background(self) -> np.ndarray:
        """Mean background counts per slot, shape (R,)."""
        b = np.asarray(self.channel.background, dtype=float)
        if b.size == 0:
            return np.zeros(len(self.receivers))
        return np.broadcast_to(b, (len(self.receivers),)).copy()

    def replace(self, **changes) -> "Scenario":
        """A copy with top-level fields replaced (``dataclasses.replace``)."""
        return dataclasses.replace(self, **changes)

    def with_channel(self, **changes) -> "Scenario":
        """A copy with channel fields replaced, e.g. ``with_channel(symbol_interval=0.2)``."""
        return dataclasses.replace(self, channel=dataclasses.replace(self.channel, **changes))

    def with_signalling(self, **changes) -> "Scenario":
        """A copy with signalling fields replaced."""
        return dataclasses.replace(self, signalling=dataclasses.replace(self.signalling, **changes))
