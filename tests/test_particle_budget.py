"""Particle runs estimated (by a timed pilot) at more than an hour are refused unless forced."""

from __future__ import annotations

import subprocess
import sys

import pytest

from capacity import load_scenario
from capacity.errors import InputError
from capacity.physics.particle_budget import PILOT, SMALL, check_run_time
from capacity.physics.response import channel_response


def test_a_billion_molecules_is_refused_with_the_estimate():
    s = load_scenario("demo")  # 25 slots of 200 ms: about a day of simulation on the build machine
    with pytest.raises(InputError, match=r"channel\.particle_count.*estimated at .* hours.*--force"):
        channel_response(s, "particles", particle_count=10**9)


def test_small_runs_skip_the_pilot_and_force_skips_the_check():
    calls = []

    def run(n):  # a real (if trivial) workload: the check only times it
        calls.append(n)
        return sum(range(1000))

    assert check_run_time(run, SMALL * PILOT) is None and calls == []
    assert check_run_time(run, 10**9, force=True) is None and calls == []
    seconds = check_run_time(run, SMALL * PILOT + 1, limit=1e9)
    assert calls == [PILOT, PILOT] and seconds >= 0


def test_cli_refusal_exits_2_without_a_traceback():
    out = subprocess.run([sys.executable, "-m", "capacity.cli", "response", "demo", "--model", "particles",
                          "--particle-count", "1000000000"], capture_output=True, text=True)
    assert out.returncode == 2
    assert "hours" in out.stderr and "--force" in out.stderr and "Traceback" not in out.stderr
