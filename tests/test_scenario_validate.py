"""validate_scenario on hand-built Scenarios, geometry_warnings, and the peak-time formula."""

import dataclasses
import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from capacity.errors import InputError
from capacity.scenario.types import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.scenario.validate import geometry_warnings, hitting_peak_time, validate_scenario

UM = 1e-6


def make(**over) -> Scenario:
    """A valid two-emitter, two-receiver layout of our own invention (SI units)."""
    parts = dict(
        name="hand built",
        medium=Medium(diffusion=79.4e-12),
        emitters=(Emitter("A", (0.0, 0.0, 0.0)), Emitter("B", (0.0, 30 * UM, 0.0))),
        receivers=(Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM), Receiver("R2", (-15 * UM, 0.0, 0.0), 4 * UM)),
        channel=Channel(symbol_interval=1.0),
        signalling=Signalling(),
    )
    parts.update(over)
    return Scenario(**parts)


def chan(**kw) -> Channel:
    return dataclasses.replace(Channel(symbol_interval=1.0), **kw)


def test_valid_scenario_is_returned_unchanged():
    s = make()
    assert validate_scenario(s) is s
    assert geometry_warnings(s) == []


BAD = [
    (dict(name=""), r"^name = '': must be a non-empty string"),
    (dict(medium=Medium(diffusion=math.nan)), r"medium\.diffusion = nan: must be a finite number"),
    (dict(medium=Medium(diffusion=-1e-10)), r"medium\.diffusion.*must be positive"),
    (dict(medium=Medium(diffusion=1e-10, degradation=-1.0)), r"medium\.degradation.*must not be negative"),
    (dict(emitters=()), r"emitter = \(\): needs at least one emitter"),
    (dict(receivers=()), r"receiver = \(\): needs at least one receiver"),
    (dict(emitters=(Emitter("A", (0.0, 0.0)),)), r"emitter\[0\]\.position.*list of 3 coordinates"),
    (dict(emitters=(Emitter("A", (0.0, math.inf, 0.0)),)), r"emitter\[0\]\.position\[1\].*finite"),
    (
        dict(emitters=(Emitter("A", (0.0, 0.0, 0.0)), Emitter("A", (0.0, 30 * UM, 0.0)))),
        r"emitter\[1\]\.name.*already used by emitter\[0\]",
    ),
    (dict(receivers=(Receiver("R1", (15 * UM, 0.0, 0.0), 0.0),)), r"receiver\[0\]\.radius.*must be positive"),
    (
        dict(receivers=(Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM, kind="sticky"),)),
        r"receiver\[0\]\.kind.*not a known option.*\"absorbing\", \"passive\"",
    ),
    (
        dict(receivers=(Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM, sample_offset=0.05),)),
        r"receiver\[0\]\.sample_offset.*only used by passive receivers",
    ),
    (
        dict(receivers=(Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM, kind="passive", sample_offset=1.5),)),
        r"receiver\[0\]\.sample_offset = 1\.5: must lie in \(0, symbol_interval\] = \(0, 1 s\]",
    ),
    (dict(channel=chan(symbol_interval=0.0)), r"channel\.symbol_interval.*must be positive"),
    (dict(channel=chan(memory=True)), r"channel\.memory = True: must be a non-negative integer"),
    (dict(channel=chan(memory=3.0)), r"channel\.memory.*non-negative integer"),
    (dict(channel=chan(memory=5000)), r"channel\.memory.*above the cap of 2000"),
    (dict(channel=chan(memory="Auto")), r"channel\.memory.*neither an integer nor \"auto\""),
    (dict(channel=chan(memory_tolerance=0.0)), r"channel\.memory_tolerance.*between 0 and 1"),
    (dict(channel=chan(background=(1.0, 2.0, 3.0))), r"channel\.background.*1 or 2 entries"),
    (dict(channel=chan(background=[1.0, 2.0])), r"channel\.background.*1 or 2 entries"),
    (dict(channel=chan(background=(1.0, math.nan))), r"channel\.background\[1\].*finite"),
    (dict(channel=chan(counting="gauss")), r"channel\.counting.*\"poisson\", \"binomial\""),
    (dict(channel=chan(residual="keep")), r"channel\.residual.*\"interference\", \"drop\""),
    (dict(channel=chan(response="exact")), r"channel\.response.*\"lone\", \"shadowed\", \"particles\""),
    (dict(channel=chan(particle_count=1000.0)), r"channel\.particle_count.*positive integer"),
    (dict(channel=chan(particle_count=-5)), r"channel\.particle_count.*positive integer"),
    (dict(channel=chan(particle_step=1.5)), r"channel\.particle_step.*longer than the symbol_interval"),
    (dict(channel=chan(seed=-3)), r"channel\.seed.*non-negative"),
    (dict(signalling=Signalling(scheme="pulse")), r"signalling\.scheme.*not a known option"),
    (dict(signalling=Signalling(levels=1)), r"signalling\.levels.*>= 2"),
    (dict(signalling=Signalling(peak=0.0)), r"signalling\.peak.*must be positive"),
    (dict(signalling=Signalling(peak=100.0, budget=-1.0)), r"signalling\.budget.*must be positive"),
    (
        dict(signalling=Signalling(peak=100.0, budget=200.5)),
        r"signalling\.budget.*peak x number of emitters = 200",
    ),
    (dict(signalling=Signalling(emitter=2)), r"signalling\.emitter = 2: must be an emitter index from 0 to 1"),
    (dict(signalling=Signalling(silent=1)), r"signalling\.silent.*true or false"),
    (dict(signalling=Signalling(amplitudes=(5.0,))), r"signalling\.amplitudes.*at least two levels"),
    (dict(signalling=Signalling(amplitudes=(0.0, -5.0))), r"signalling\.amplitudes\[1\].*must not be negative"),
    (dict(signalling=Signalling(amplitudes=(0.0, 20.0, 20.0))), r"signalling\.amplitudes.*repeats a level"),
    (
        dict(signalling=Signalling(amplitudes=(0.0, 2000.0), budget=4001.0)),
        r"budget.*largest amplitude x number of emitters = 4000",
    ),
]


@pytest.mark.parametrize("over, pattern", BAD)
def test_bad_values(over, pattern):
    with pytest.raises(InputError, match=pattern) as info:
        validate_scenario(make(**over))
    assert info.value.fix


def test_budget_equal_to_the_most_is_allowed():
    s = make(signalling=Signalling(peak=100.0, budget=200.0))
    assert validate_scenario(s) is s


def test_bad_symbol_interval_reported_before_sample_offset():
    rx = (Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM, kind="passive", sample_offset=0.05),)
    with pytest.raises(InputError, match=r"channel\.symbol_interval = nan"):
        validate_scenario(make(receivers=rx, channel=chan(symbol_interval=math.nan)))


def test_not_a_scenario():
    with pytest.raises(InputError, match="is not a Scenario"):
        validate_scenario({"name": "x"})


# -- geometry errors: depth/overlap stated as arithmetic on the layout (brute force by hand) ----------------------
def test_emitter_inside_states_depth_and_fix():
    s = make(emitters=(Emitter("A", (12 * UM, 0.0, 0.0)),))  # 3 um from the centre of R1 (radius 5 um)
    with pytest.raises(
        InputError,
        match=r'emitter\[0\]\.position.*lies 2 um inside receiver\[0\] "R1" '
        r"\(centre distance 3 um, radius 5 um\).*Fix: move the emitter at least 2 um",
    ):
        validate_scenario(s)


def test_emitter_on_surface():
    s = make(emitters=(Emitter("A", (-15 * UM, 4 * UM, 0.0)),))  # exactly on R2 (radius 4 um)
    with pytest.raises(InputError, match=r'lies on the surface of receiver\[1\] "R2"'):
        validate_scenario(s)


def test_emitter_inside_passive_receiver_is_also_rejected():
    rx = (Receiver("P", (0.0, 0.0, 0.0), 5 * UM, kind="passive"),)
    with pytest.raises(InputError, match=r"inside receiver\[0\] \"P\""):
        validate_scenario(make(receivers=rx, emitters=(Emitter("A", (1 * UM, 0.0, 0.0)),)))


def test_overlapping_receivers_state_overlap():
    rx = (Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM), Receiver("R2", (15 * UM, 7 * UM, 0.0), 4 * UM))
    # centre distance 7 um < 5 + 4 = 9 um: overlap 2 um
    with pytest.raises(InputError, match=r'receiver\[1\]\.centre.*"R2" overlaps receiver\[0\] "R1" by 2 um'):
        validate_scenario(make(receivers=rx))


def test_touching_receivers():
    rx = (Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM), Receiver("R2", (15 * UM, 10 * UM, 0.0), 5 * UM))
    with pytest.raises(InputError, match=r'"R2" touches receiver\[0\] "R1"'):
        validate_scenario(make(receivers=rx))


# -- warnings --------------------------------------------------------------------------------------------------
def test_warning_emitter_near_surface():
    s = make(emitters=(Emitter("A", (9.6 * UM, 0.0, 0.0)),))  # 0.4 um from R1's surface (< 0.5 um = 0.1 r)
    w = geometry_warnings(validate_scenario(s))
    assert len(w) == 1 and '"A" is 0.4 um from the surface of receiver "R1"' in w[0]
    # peak d^2/(6D) = (0.4 um)^2 / (6 x 79.4 um^2/s) = 3.359e-4 s (references.md, Yilmaz et al. 2014)
    assert "peaks 0.000336 s after release" in w[0]


def test_warning_receivers_close():
    rx = (Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM), Receiver("R2", (15 * UM, 9.3 * UM, 0.0), 4 * UM))
    w = geometry_warnings(validate_scenario(make(receivers=rx)))
    assert any('receivers "R1" and "R2" are 0.3 um apart' in x for x in w)


def test_warning_late_peak():
    w = geometry_warnings(validate_scenario(make(channel=chan(symbol_interval=0.01))))
    # A -> R1: gap 10 um, peak d^2/(6D) = 1e-10 / (6 * 79.4e-12) s = 0.2099 s = 21 slots of 10 ms
    assert any('emitter "A" at receiver "R1" peaks 21 slots after release' in x for x in w)


def test_warning_early_sample_coarse_step_heavy_work():
    rx = (
        Receiver("R1", (15 * UM, 0.0, 0.0), 5 * UM),
        Receiver("P", (-15 * UM, 0.0, 0.0), 4 * UM, kind="passive", sample_offset=2e-4),
    )
    s = make(receivers=rx, channel=chan(symbol_interval=0.05, memory=2000, particle_count=100000, particle_step=0.04))
    w = geometry_warnings(validate_scenario(s))
    assert any('passive receiver "P" samples 0.0002 s into the slot, 0.40%' in x for x in w)
    # earliest peak: A -> R1, 0.2099 s; 0.04 / 0.2099 = 0.191
    assert any("particle_step (0.04 s) is 0.191 of the earliest peak time (0.21 s)" in x for x in w)
    assert any("4e+08 molecule-slots" in x for x in w)  # 1e5 particles x 2 emitters x 2001 slots
    assert not any("peaks" in x and '"R1"' in x and '"A"' in x for x in w)  # 4.2 slots: below the 5-slot mark


# -- peak time ---------------------------------------------------------------------------------------------------
def test_peak_time_closed_form_without_degradation():
    # references.md (Yilmaz et al. 2014): t* = d^2/(6D); base case d = 5 um, D = 79.4 um^2/s -> 0.05247691 s
    assert hitting_peak_time(5e-6, 79.4e-12) == pytest.approx(0.05247691, rel=1e-7)
    d = np.array([1e-6, 2e-5])
    np.testing.assert_allclose(hitting_peak_time(d, 1e-10), d**2 / 6e-10, rtol=1e-14)


@pytest.mark.parametrize("k", [0.0, 1.0, 10.0, 1e3])
def test_peak_time_with_degradation_matches_numeric_maximum(k):
    # independent: maximise f(t) e^(-kt) (hitting density, Yilmaz et al. 2014, with degradation) with scipy
    d, dc = 5e-6, 79.4e-12

    def neg_log_density(u):
        t = math.exp(u)
        return -(-1.5 * u - d * d / (4 * dc * t) - k * t)

    res = minimize_scalar(
        neg_log_density, bounds=(math.log(1e-6), math.log(10.0)), method="bounded", options={"xatol": 1e-12}
    )
    assert float(hitting_peak_time(d, dc, k)) == pytest.approx(math.exp(res.x), rel=1e-7)
