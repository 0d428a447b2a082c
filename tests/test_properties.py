"""Property-based checks (hypothesis): for any scenario the loader accepts, the responses hold their invariants and
the rates are possible numbers; anything the loader rejects is an InputError naming a field.

Invariants (common practice): probabilities lie in [0, 1]; a molecule is captured at most once, so each absorbing
pair's total and, in the models where receivers shadow each other, the total over receivers are at most 1; an
information rate is finite, >= 0 and at most log2 of the alphabet size (a mutual information is bounded by the
input entropy: Cover & Thomas, Thm 2.6.4). Bounded in time: few examples, no deadline, a fixed seed.
"""

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, seed, settings
from hypothesis import strategies as st

import capacity  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.physics.response import channel_response
from capacity.rates import link_rates
from capacity.scenario.load import scenario_from_dict
from capacity.schemes.builders import build_alphabet

UM = 1e-6
SETTINGS = settings(max_examples=10, deadline=None, derandomize=True, suppress_health_check=list(HealthCheck))

coord = st.floats(-30.0, 30.0, allow_nan=False)


@st.composite
def layouts(draw):
    n_e = draw(st.integers(1, 2))
    n_r = draw(st.integers(1, 2))
    return {
        "name": "property layout",
        "medium": {"diffusion": draw(st.floats(20.0, 400.0)) * 1e-12,
                   "degradation": draw(st.sampled_from([0.0, 0.3, 3.0]))},
        "emitter": [{"name": f"e{i}", "position": [draw(coord) * UM, draw(coord) * UM, 0.0]} for i in range(n_e)],
        "receiver": [{"name": f"r{j}", "centre": [draw(coord) * UM, draw(coord) * UM, draw(coord) * UM],
                      "radius": draw(st.floats(1.0, 8.0)) * UM,
                      "kind": draw(st.sampled_from(["absorbing", "absorbing", "passive"]))} for j in range(n_r)],
        "channel": {"symbol_interval": draw(st.floats(0.03, 0.6)), "memory": draw(st.integers(1, 4)),
                    "background": draw(st.floats(0.0, 2.0))},
        "signalling": {"scheme": "amplitude", "levels": draw(st.integers(2, 3)), "peak": draw(st.floats(5.0, 80.0))},
    }


ACCEPTED = []


def _accepted(data):
    try:
        s = scenario_from_dict(data)
    except InputError as exc:
        assert exc.field  # a rejected layout names what is wrong
        return None
    ACCEPTED.append(s.name)
    return s


@seed(20261202)
@SETTINGS
@given(layouts(), st.sampled_from(["lone", "shadowed"]))
def test_responses_hold_their_invariants(data, model):
    s = _accepted(data)
    if s is None:
        return
    try:
        resp = channel_response(s, model)
    except InputError as exc:
        assert exc.field
        return
    passive = np.array([r.kind == "passive" for r in s.receivers])
    assert np.all(np.isfinite(resp.hits)) and np.all(resp.hits >= 0) and np.all(resp.hits <= 1)
    totals = resp.hits.sum(-1) + resp.tail
    assert np.all(totals[:, ~passive] <= 1 + 1e-9)
    if resp.model != "lone":
        assert np.all(totals[:, ~passive].sum(axis=1) <= 1 + 1e-9)


@seed(20261202)
@settings(SETTINGS, max_examples=4)
@given(layouts())
def test_rates_are_possible_numbers(data):
    s = _accepted(data)
    if s is None:
        return
    try:
        resp = channel_response(s, "lone")
    except InputError:
        return
    alphabet = build_alphabet(s.signalling, len(s.emitters))
    r = link_rates(s, resp, alphabet, n_symbols=400, n_runs=2, bound_samples=400, window_samples=256)
    top = math.log2(alphabet.size)
    for value in (r.isi_free.capacity, r.information_rate.rate, r.lower_bound, r.upper_bound):
        assert math.isfinite(value)
        assert -0.05 <= value <= top + 0.05  # Monte Carlo estimates may stray by a few standard errors


@pytest.mark.parametrize("junk", [{"medium": "x"}, {"emitter": [{"position": ["a", 0, 0]}]}, [], {"channel": 3}])
def test_rejected_input_names_a_field(junk):
    with pytest.raises(InputError) as info:
        scenario_from_dict(junk)
    assert info.value.field


def test_the_properties_saw_accepted_layouts():
    # runs after the two property tests (file order): most drawn layouts must have reached the models
    assert len(ACCEPTED) >= 6
