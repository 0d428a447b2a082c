"""channel_response: model table, memory choice, overrides and errors (outside references named beside checks)."""

import numpy as np
import pytest
from scipy import special

from capacity.errors import InputError
from capacity.physics import particles, shadowed
from capacity.physics.response import MEMORY_CAP, channel_response
from capacity.scenario.types import Channel, Emitter, Medium, Receiver, Scenario

D = 79.4e-12


def scenario(**channel):
    settings = dict(symbol_interval=0.3, memory_tolerance=0.05, response="lone")
    settings.update(channel)
    return Scenario(
        name="two emitters, three receivers",
        medium=Medium(diffusion=D),
        emitters=(Emitter("left", (0.0, 0.0, 0.0)), Emitter("up", (0.0, 12e-6, 0.0))),
        receivers=(Receiver("near", (11e-6, 0.0, 0.0), 5e-6),
                   Receiver("far", (-14e-6, -6e-6, 0.0), 4e-6),
                   Receiver("probe", (3e-6, 20e-6, 0.0), 4e-6, kind="passive", sample_offset=0.1)),
        channel=Channel(**settings),
    )


def gap(sc, i, j):
    return np.linalg.norm(sc.emitter_positions[i] - sc.receiver_centres[j]) - sc.receiver_radii[j]


def test_lone_response_shapes_values_and_notes():
    sc = scenario(memory=5)
    res = channel_response(sc)
    assert res.model == "lone" and res.stderr is None and res.memory == 5
    assert res.hits.shape == (2, 3, 6) and res.tail.shape == (2, 3)
    assert res.hits.dtype == np.float64 and isinstance(res.hits, np.ndarray) and isinstance(res.tail, np.ndarray)
    np.testing.assert_allclose(res.slot_edges, 0.3 * np.arange(7), rtol=0, atol=1e-15)
    for i in range(2):
        for j in range(2):
            d, r = gap(sc, i, j), sc.receiver_radii[j]
            # eventual capture r/(r+d) (Yilmaz et al. 2014); first slot r/(r+d) erfc(d/sqrt(4 D Ts))
            assert res.hits[i, j].sum() + res.tail[i, j] == pytest.approx(r / (r + d), rel=1e-13)
            first = r / (r + d) * special.erfc(d / np.sqrt(4 * D * 0.3))
            assert res.hits[i, j, 0] == pytest.approx(first, rel=1e-13)
        # passive receiver sampled at l Ts + 0.1 s (erfc form, reference sheet)
        rho, a, t = np.linalg.norm(sc.emitter_positions[i] - sc.receiver_centres[2]), 4e-6, 0.1
        s = np.sqrt(4 * D * t)
        p0 = 0.5 * (special.erfc((rho - a) / s) - special.erfc((rho + a) / s)) - np.sqrt(D * t / np.pi) / rho * (
            np.exp(-(rho - a) ** 2 / s**2) - np.exp(-(rho + a) ** 2 / s**2))
        assert res.hits[i, 2, 0] == pytest.approx(p0, rel=1e-12)
    assert any("L = 5" in n for n in res.notes)
    assert any("largest tail mass" in n and f"{res.tail.max():.3g}" in n for n in res.notes)


def test_memory_auto_is_the_smallest_meeting_the_tolerance():
    sc = scenario()  # memory "auto", tolerance 0.05
    res = channel_response(sc)
    L = res.memory
    assert 0 < L < MEMORY_CAP
    assert any(f"L = {L}" in n and "0.05" in n for n in res.notes)
    longer = channel_response(sc, memory=MEMORY_CAP)  # explicit override, far beyond L
    peak = longer.hits.max(axis=-1)
    assert np.all(longer.hits[..., L + 1:] <= 0.05 * peak[..., None])  # L meets the tolerance
    assert np.any(longer.hits[..., L] > 0.05 * peak)  # L - 1 does not
    np.testing.assert_allclose(res.hits, longer.hits[..., : L + 1], rtol=1e-14)
    # absorbing tail in complementary form: r/(r+d) erf(d / sqrt(4 D (L+1) Ts)) (Yilmaz et al. 2014)
    for i in range(2):
        for j in range(2):
            d, r = gap(sc, i, j), sc.receiver_radii[j]
            expected = r / (r + d) * special.erf(d / np.sqrt(4 * D * (L + 1) * 0.3))
            assert res.tail[i, j] == pytest.approx(expected, rel=1e-12)
    # passive tail: the longer run's tail plus the slots between (a plain sum)
    np.testing.assert_allclose(res.tail[:, 2], longer.tail[:, 2] + longer.hits[:, 2, L + 1:].sum(-1), rtol=1e-12)


def test_bad_requests_raise_input_errors():
    sc = scenario(memory=3)
    with pytest.raises(InputError, match="unknown response model"):
        channel_response(sc, "psychic")
    with pytest.raises(InputError, match="channel.memory"):
        channel_response(sc, memory="soon")
    with pytest.raises(InputError, match="channel.memory"):
        channel_response(sc, memory=-2)
    with pytest.raises(InputError, match="channel.memory_tolerance"):
        channel_response(scenario(memory_tolerance=1.5))
    inside = sc.replace(emitters=(Emitter("in", (12e-6, 0.0, 0.0)),))
    with pytest.raises(InputError, match=r"emitter\[0\]"):
        channel_response(inside)
    late = sc.replace(receivers=(Receiver("p", (0.0, 9e-6, 0.0), 2e-6, kind="passive", sample_offset=0.5),))
    with pytest.raises(InputError, match="sample_offset"):
        channel_response(late)
    with pytest.raises(InputError, match="medium.diffusion"):
        channel_response(sc.replace(medium=Medium(diffusion=-1.0)))


def test_shadowed_dispatch_keeps_passive_lone_and_reorders():
    sc = scenario(memory=5, response="shadowed")
    res = channel_response(sc)
    lone = channel_response(sc, "lone")
    assert res.model == "shadowed" and res.hits.shape == (2, 3, 6)
    np.testing.assert_array_equal(res.hits[:, 2], lone.hits[:, 2])  # passive: lone closed form
    assert any("ignore absorption" in n for n in res.notes)
    # the absorbing receivers, in scenario order, equal shadowed_hits on the absorbing subset
    h, t = shadowed.shadowed_hits(sc.emitter_positions, sc.receiver_centres[:2], sc.receiver_radii[:2], D, 0.0,
                                  0.3, 5)
    np.testing.assert_allclose(res.hits[:, :2], np.asarray(h), rtol=1e-13)
    # shadowing only removes molecules: each absorbing receiver catches at most its lone eventual capture
    assert np.all(res.hits[:, :2].sum(-1) + res.tail[:, :2] <= lone.hits[:, :2].sum(-1) + lone.tail[:, :2] + 1e-12)


def test_particles_step_limit_is_an_input_error():
    sc = scenario(memory=3)
    # (L+1) Ts / time_step = 4 * 0.3 / 1e-7 = 1.2e7 steps > 1e6
    with pytest.raises(InputError, match="channel.memory") as err:
        channel_response(sc, "particles", particle_step=1e-7, particle_count=10)
    assert "particle_step" in str(err.value)


def test_old_particle_keywords_work_with_a_deprecation_warning():
    sc = scenario(memory=3)
    with pytest.raises(InputError) as new:
        channel_response(sc, "particles", particle_step=1e-7, particle_count=10)
    with pytest.warns(DeprecationWarning) as caught, pytest.raises(InputError) as old:
        channel_response(sc, "particles", time_step=1e-7, particles=10)
    # the same refusal, with the step count (L+1) Ts / dt = 1.2e7 computed from the step given under the old name
    assert str(old.value) == str(new.value) and "1.2e+07 time steps" in str(old.value)
    texts = sorted(str(w.message) for w in caught if w.category is DeprecationWarning)
    assert texts == ["channel_response(particles=...) is deprecated: pass particle_count=... instead (same meaning "
                     "and units)", "channel_response(time_step=...) is deprecated: pass particle_step=... instead "
                     "(same meaning and units)"]


@pytest.mark.parametrize("kwargs, field", [
    (dict(particle_count=0), "particle_count"),
    (dict(particle_count=2.5), "particle_count"),
    (dict(particle_step=-1e-3), "particle_step"),
    (dict(particle_step=0.5), "particle_step"),  # longer than the 0.3 s slot
    (dict(particles=100, particle_count=100), "particles"),  # both spellings
])
def test_particle_keywords_checked_under_their_own_names(kwargs, field):
    with pytest.raises(InputError) as err:
        channel_response(scenario(memory=3), "particles", **kwargs)
    assert err.value.field == field and err.value.fix


@pytest.mark.slow
def test_particles_dispatch_and_overrides():
    sc = scenario(memory=3, particle_count=50, seed=1)
    a = channel_response(sc, "particles", particle_count=1000, seed=3)
    b = channel_response(sc, "particles", particle_count=1000, seed=4)
    lone = channel_response(sc, "lone")
    assert a.model == "particles" and a.stderr.shape == a.hits.shape == (2, 3, 4)
    assert any("1000 molecules" in n and "seed 3" in n for n in a.notes)
    assert not np.array_equal(a.hits, b.hits)  # the seed override reaches the simulator
    # Bernoulli standard errors sqrt(p (1-p) / N) (common practice)
    np.testing.assert_allclose(a.stderr, np.sqrt(a.hits * (1 - a.hits) / 1000), rtol=1e-12)
    np.testing.assert_allclose(a.tail[:, 2], lone.tail[:, 2], rtol=1e-14)  # passive tails from the closed form


def test_shadowed_validity_notes_warn_once():
    sc = scenario(memory=5, response="shadowed")
    small = Receiver("far", (-14e-6, -6e-6, 0.0), 1.5e-6)  # radius ratio 5 / 1.5 = 3.3: outside the valid range
    sc = sc.replace(receivers=(sc.receivers[0], small, sc.receivers[2]))
    expected = shadowed.validity_notes(sc.emitter_positions, sc.receiver_centres[:2], sc.receiver_radii[:2], D,
                                       0.0)
    assert expected  # the layout is outside the range the shadowed model states
    with pytest.warns(UserWarning) as record:
        res = channel_response(sc)
    assert len([w for w in record if "validated range" in str(w.message)]) == 1
    assert all(note in res.notes for note in expected)


def test_particle_step_count_matches_the_simulator_time_step():
    """The step budget that channel_response checks is the one the simulator really uses (its own automatic dt,
    shortened only so that a slot is a whole number of steps)."""
    from capacity.physics.response import layout_arrays, particle_step_count

    sc = scenario(memory=3)
    lay = layout_arrays(sc)
    sim = particles._simulate(lay.emitters, lay.centres, lay.radii, lay.passive, lay.offsets, lay.diffusion,
                              lay.degradation, lay.symbol_interval, 3, particles=4, seed=0)
    used = 4 * lay.symbol_interval / sim.time_step
    assert particle_step_count(lay, 3, None) <= used <= particle_step_count(lay, 3, None) * 1.01 + 1
