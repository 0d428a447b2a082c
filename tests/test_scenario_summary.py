"""summarise / format_summary against closed forms computed here (references.md values cited beside each)."""

import json
import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import minimize_scalar

from capacity.scenario.load import scenario_from_dict
from capacity.scenario.summary import format_summary, lone_capture, passive_fraction, passive_peak, summarise
from capacity.scenario.types import Channel, Emitter, Medium, Receiver, Scenario

UM = 1e-6
D_BASE = 79.4e-12


def layout(degradation=0.0, kind2="absorbing", ts=0.2) -> Scenario:
    """references.md shadowing example: source (0,10,0) um; spheres of 5 um at (15,10,0) and (15,-10,0) um."""
    return Scenario(
        name="two spheres",
        medium=Medium(D_BASE, degradation),
        emitters=(Emitter("S", (0.0, 10 * UM, 0.0)),),
        receivers=(
            Receiver("near", (15 * UM, 10 * UM, 0.0), 5 * UM),
            Receiver("far", (15 * UM, -10 * UM, 0.0), 5 * UM, kind=kind2),
        ),
        channel=Channel(symbol_interval=ts),
    )


def test_pairs_against_closed_forms():
    d = summarise(layout())
    assert (d["n_emitters"], d["n_receivers"]) == (1, 2)
    near, far = d["pairs"]
    assert (near["emitter"], near["receiver"], far["receiver"]) == ("S", "near", "far")
    rho_far = math.hypot(15 * UM, 20 * UM)  # 25 um
    assert near["centre_distance"] == pytest.approx(15 * UM, rel=1e-14)
    assert far["centre_distance"] == pytest.approx(rho_far, rel=1e-14)
    assert near["gap"] == pytest.approx(10 * UM, rel=1e-12)
    assert far["gap"] == pytest.approx(20 * UM, rel=1e-12)
    # Yilmaz et al. 2014 (references.md): lone eventual capture r/(r+d) = 0.3333 and 0.2000 here
    assert near["lone_capture"] == pytest.approx(1 / 3, rel=1e-13)
    assert far["lone_capture"] == pytest.approx(0.2, rel=1e-13)
    # peak of the hitting rate d^2/(6D) (references.md), and in slots of 0.2 s
    for p, gap in ((near, 10 * UM), (far, 20 * UM)):
        assert p["peak_time"] == pytest.approx(gap**2 / (6 * D_BASE), rel=1e-13)
        assert p["peak_time_slots"] == pytest.approx(gap**2 / (6 * D_BASE) / 0.2, rel=1e-13)
        assert p["peak_fraction"] is None
    (g,) = d["receiver_gaps"]
    assert (g["a"], g["b"]) == ("near", "far")
    assert g["centre_distance"] == pytest.approx(20 * UM, rel=1e-14)
    assert g["gap"] == pytest.approx(10 * UM, rel=1e-12)
    assert d["warnings"] == []
    json.dumps(d)  # JSON-serialisable


def test_base_case_peak_time():
    # references.md base case: r = d = 5 um, D = 79.4 um^2/s: t* = 0.05247691 s, capture 1/2
    s = Scenario(
        "base",
        Medium(D_BASE),
        (Emitter("S", (0.0, 0.0, 0.0)),),
        (Receiver("R", (10 * UM, 0.0, 0.0), 5 * UM),),
        Channel(symbol_interval=0.02),
    )
    (p,) = summarise(s)["pairs"]
    assert p["peak_time"] == pytest.approx(0.05247691, rel=2e-7)
    assert p["peak_time_slots"] == pytest.approx(0.05247691 / 0.02, rel=2e-7)
    assert p["lone_capture"] == pytest.approx(0.5, rel=1e-14)


@pytest.mark.parametrize("k, limit", [(1.0, 0.28528336), (10.0, 0.08478974)])
def test_capture_with_degradation(k, limit):
    # references.md [computed], Heren et al. 2015 setting: limit r/(r+d) exp(-d sqrt(k/D)) in the base case
    assert lone_capture(5 * UM, 5 * UM, D_BASE, k) == pytest.approx(limit, rel=0, abs=5e-9)  # 8 decimals given
    # and inside summarise, recomputed here from the closed form
    near = summarise(layout(degradation=k))["pairs"][0]
    assert near["lone_capture"] == pytest.approx(1 / 3 * math.exp(-10 * UM * math.sqrt(k / D_BASE)), rel=1e-13)


def _passive_by_quadrature(t, rho, a, dc, k=0.0):
    """Independent route: integrate the 3-D Gaussian over shells around the source; the part of a shell of radius
    u inside the ball is the lens fraction (a^2 - (u - rho)^2) / (4 u rho) (elementary geometry)."""
    var4 = 4.0 * dc * t

    def shell(u):
        return (
            4
            * math.pi
            * u
            * u
            * (math.pi * var4) ** -1.5
            * math.exp(-u * u / var4)
            * (a * a - (u - rho) ** 2)
            / (4 * u * rho)
        )

    val, _ = quad(shell, rho - a, rho + a, epsabs=0, epsrel=1e-12)
    return val * math.exp(-k * t)


@pytest.mark.parametrize(
    "t, expected",
    [(0.05, 1.470909e-2), (0.1, 3.248426e-2), (0.5, 2.369626e-2), (1.0, 1.168294e-2), (5.0, 1.382684e-3)],
)
def test_passive_fraction_reference_values(t, expected):
    # references.md [computed], a = 5 um, rho = 10 um, D = 79.4 um^2/s; plus an independent quadrature
    got = float(passive_fraction(t, 10 * UM, 5 * UM, D_BASE))
    assert got == pytest.approx(expected, rel=1e-6)
    assert got == pytest.approx(_passive_by_quadrature(t, 10 * UM, 5 * UM, D_BASE), rel=1e-9)


def test_passive_peak_reference_value():
    # references.md [computed]: peak at 0.17524 s with 0.038773 (a = 5 um, rho = 10 um)
    t, v = passive_peak(10 * UM, 5 * UM, D_BASE)
    assert t == pytest.approx(0.17524, rel=1e-4)
    assert v == pytest.approx(0.038773, rel=1e-4)


def test_passive_peak_with_degradation_against_quadrature():
    k, rho, a = 2.0, 12 * UM, 3 * UM
    res = minimize_scalar(
        lambda u: -_passive_by_quadrature(math.exp(u), rho, a, D_BASE, k),
        bounds=(math.log(1e-3), math.log(10.0)),
        method="bounded",
        options={"xatol": 1e-9},
    )
    t, v = passive_peak(rho, a, D_BASE, k)
    assert t == pytest.approx(math.exp(res.x), rel=1e-5)  # flat maximum: time to ~sqrt(tolerance)
    assert v == pytest.approx(-res.fun, rel=1e-10)


def test_passive_pair_in_summary():
    far = summarise(layout(kind2="passive"))["pairs"][1]
    assert far["kind"] == "passive" and far["lone_capture"] is None
    t, v = passive_peak(25 * UM, 5 * UM, D_BASE)
    assert far["peak_time"] == t and far["peak_fraction"] == v
    assert far["peak_time_slots"] == pytest.approx(t / 0.2, rel=1e-14)


def test_warnings_are_passed_through():
    d = summarise(layout(ts=0.01))  # near pair peaks at 0.2099 s = 21 slots
    assert len(d["warnings"]) == 2 and "peaks 21 slots" in d["warnings"][0]


def test_format_summary_text():
    s = scenario_from_dict(
        {
            "name": "text check",
            "medium": {"diffusion": "79.4 um^2/s"},
            "emitter": [{"name": "S", "position": [0, "10 um", 0]}],
            "receiver": [
                {"name": "near", "centre": ["15 um", "10 um", 0], "radius": "5 um"},
                {"name": "far", "centre": ["15 um", "-10 um", 0], "radius": "5 um"},
            ],
            "channel": {"symbol_interval": "200 ms"},
        }
    )
    text = format_summary(summarise(s))
    lines = text.splitlines()
    assert lines[0] == "scenario: text check"
    assert "D = 79.4 µm²/s" in text and "symbol interval = 200 ms" in text
    assert "µm" in lines[3] and "peak ms" in lines[3]
    row = next(x for x in lines if x.startswith("S -> near"))
    # distance 15 um, gap 10 um, capture 1/3, peak 1e-10/(6 D) = 209.9 ms, 1.05 slots (closed forms above)
    assert row.split()[3:] == ["absorbing", "15", "10", "0.3333", "209.9", "1.05"]
    assert "peak fraction" not in text  # no passive receiver
    assert any(x.startswith("near - far") and x.split()[-2:] == ["20", "10"] for x in lines)
    assert lines[-1] == "warnings: none"
    assert np.isfinite(summarise(s)["pairs"][1]["peak_time"])


def test_format_summary_mixed_kinds():
    text = format_summary(summarise(layout(kind2="passive")))
    near = next(x for x in text.splitlines() if x.startswith("S -> near"))
    far = next(x for x in text.splitlines() if x.startswith("S -> far"))
    t, v = passive_peak(25 * UM, 5 * UM, D_BASE)
    assert "lone capture" in text and "peak fraction" in text
    # near: absorbing, capture 1/3 (Yilmaz et al. 2014), no fraction; far: passive, no capture
    assert near.split()[3:7] == ["absorbing", "15", "10", "0.3333"] and near.split()[7] == "-"
    assert far.split()[3:8] == ["passive", "25", "20", "-", format(v, ".4g")]
    assert far.split()[8] == format(t * 1e3, ".4g")
