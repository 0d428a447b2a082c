"""Warnings for values whose size suggests a unit slip, and --strict."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from capacity import load_scenario
from capacity.scenario.magnitudes import magnitude_warnings
from capacity.scenario.summary import scenario_warnings

SCENARIO = """
name = "slip check"
[medium]
diffusion = {diffusion}
[[emitter]]
name = "sender"
position = ["0 um", "0 um", "0 um"]
[[receiver]]
name = "bead"
centre = ["{distance}", "0 um", "0 um"]
radius = "{radius}"
[channel]
symbol_interval = {interval}
"""


def _write(tmp_path, diffusion='"100 um^2/s"', distance="10 um", radius="2 um", interval='"100 ms"'):
    path = Path(tmp_path) / "s.toml"
    path.write_text(SCENARIO.format(diffusion=diffusion, distance=distance, radius=radius, interval=interval))
    return path


def test_a_plausible_layout_has_no_magnitude_warning(tmp_path):
    assert magnitude_warnings(load_scenario(_write(tmp_path))) == []
    assert magnitude_warnings(load_scenario("demo")) == []


@pytest.mark.parametrize(
    "change, field, hint",
    [
        ({"diffusion": "0.05"}, "medium.diffusion", "mm^2/s"),
        ({"diffusion": '"1e-15 m^2/s"'}, "medium.diffusion", ""),
        ({"radius": "2 m", "distance": "10 m"}, "receiver[0].radius", ""),
        ({"radius": "2 nm", "distance": "6 nm"}, "receiver[0].radius", ""),
        ({"interval": "7200"}, "channel.symbol_interval", ""),
        ({"interval": '"0.1 us"'}, "channel.symbol_interval", ""),
        ({"interval": "500"}, "channel.symbol_interval", '"500 ms"'),  # peak 0.107 s: a 500 s slot is empty
        ({"interval": '"0.5 ms"'}, "the signal from", "slots after release"),  # 1/200 of the 0.107 s peak
    ],
)
def test_implausible_values_are_named_with_their_si_reading(tmp_path, change, field, hint):
    warnings = scenario_warnings(load_scenario(_write(tmp_path, **change)))
    assert warnings and any(w.startswith(field) for w in warnings), warnings
    assert hint in " ".join(warnings)


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "capacity.cli", *args], capture_output=True, text=True)


def test_check_prints_the_warning_and_strict_turns_it_into_an_error(tmp_path):
    path = _write(tmp_path, interval="500")
    out = _cli("check", str(path), "--json")
    assert out.returncode == 0
    assert any("channel.symbol_interval" in w for w in json.loads(out.stdout)["warnings"])
    strict = _cli("check", str(path), "--strict")
    assert strict.returncode == 2 and strict.stdout == ""
    assert "--strict" in strict.stderr and "channel.symbol_interval" in strict.stderr
    assert "Traceback" not in strict.stderr
