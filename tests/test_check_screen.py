"""`capacity check` echoes every parameter as read, with its unit, and explains its columns."""

from __future__ import annotations

import dataclasses
import json
import subprocess
import sys

import pytest
import tomllib

from capacity import load_scenario
from capacity.scenario.echo import format_parameters, parameters
from capacity.scenario.load import builtin_path


def test_every_field_of_the_scenario_is_echoed():
    s = load_scenario("demo")
    fields = {p["field"] for p in parameters(s)}
    for section, obj in (("medium", s.medium), ("channel", s.channel), ("signalling", s.signalling)):
        for f in dataclasses.fields(obj):
            assert f"{section}.{f.name}" in fields
    for j, r in enumerate(s.receivers):
        for name in ("centre", "radius", "kind"):
            assert f"receiver[{j}] ({r.name}).{name}" in fields


def test_echoed_values_match_the_file_in_its_own_units():
    # reference: the demo file read with the standard library's TOML reader (not the project's loader)
    raw = tomllib.loads(builtin_path("demo").read_text())
    shown = {p["field"]: p for p in parameters(load_scenario("demo"))}
    assert shown["receiver[0] (bead-north).radius"]["shown"] == raw["receiver"][0]["radius"].split()[0]
    assert shown["medium.diffusion"]["shown"] == raw["medium"]["diffusion"].split()[0]
    assert shown["medium.diffusion"]["display_unit"] == "um^2/s"
    assert shown["channel.symbol_interval"]["shown"] == raw["channel"]["symbol_interval"].split()[0]
    assert shown["signalling.budget"]["shown"] == str(float(raw["signalling"]["budget"])).rstrip("0").rstrip(".")
    assert shown["channel.symbol_interval"]["value"] == pytest.approx(0.2, rel=1e-15)
    assert shown["channel.symbol_interval"]["unit"] == "s"
    lines = format_parameters(load_scenario("demo"))
    assert any(line.strip().startswith("channel.particle_step") and "automatic" in line for line in lines)
    assert any(line.strip().startswith("channel.particle_count") and line.split("=")[1].split()[0]
               == str(raw["channel"]["particle_count"]) for line in lines)


def test_check_prints_the_legend_and_the_parameters():
    out = subprocess.run([sys.executable, "-m", "capacity.cli", "check", "demo"], capture_output=True, text=True)
    assert out.returncode == 0
    assert "lone capture:" in out.stdout and "peak slots:" in out.stdout
    assert "parameters as read:" in out.stdout and "receiver[1] (bead-south).radius" in out.stdout
    js = subprocess.run([sys.executable, "-m", "capacity.cli", "check", "demo", "--json"], capture_output=True,
                        text=True)
    data = json.loads(js.stdout)
    assert {"field", "value", "unit"} <= set(data["parameters"][0])
    assert data["schema"] == 2 and isinstance(data["units"], dict)  # response JSON: tests/test_cli.py
