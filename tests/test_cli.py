"""The command line, run for real as a user would (subprocess), on small scenario files."""

from __future__ import annotations

import json
import re
import subprocess
import sys
import textwrap

import numpy as np
import pytest

SMALL = textwrap.dedent(
    """
    name = "cli test pair"
    [medium]
    diffusion = "80 um^2/s"
    [[emitter]]
    name = "tx"
    position = [0, 0, 0]
    [[receiver]]
    name = "rx"
    centre = ["10 um", 0, 0]
    radius = "5 um"
    [channel]
    symbol_interval = "300 ms"
    memory = 2
    background = 0.3
    response = "lone"
    [signalling]
    scheme = "amplitude"
    levels = 2
    peak = 40
    budget = 15
    """
)


def _run(*args, check=True):
    proc = subprocess.run([sys.executable, "-m", "capacity.cli", *args], capture_output=True, text=True,
                          timeout=600)
    if check and proc.returncode != 0:
        raise AssertionError(f"exit {proc.returncode}\nstdout:\n{proc.stdout}\nstderr:\n{proc.stderr}")
    return proc


@pytest.fixture()
def small(tmp_path):
    path = tmp_path / "small.toml"
    path.write_text(SMALL)
    return path


def test_help_lists_every_subcommand():
    out = _run("--help").stdout
    # argparse lists each sub-command as an indented line "    name   help text": compare whole names, not
    # substrings of the help text
    listed = set(re.findall(r"^ {4}([a-z]+)\s", out, flags=re.MULTILINE))
    assert {"check", "response", "rate", "compare", "demo"} <= listed, listed


def test_check_json_reports_lone_capture(small):
    data = json.loads(_run("check", str(small), "--json").stdout)
    (pair,) = data["pairs"]
    assert (pair["emitter"], pair["receiver"], pair["kind"]) == ("tx", "rx", "absorbing")
    r, centre, D, ts = 5e-6, 10e-6, 80e-12, 0.3  # the SMALL scenario, SI
    d = centre - r
    assert pair["centre_distance"] == pytest.approx(centre, rel=1e-12)
    assert pair["gap"] == pytest.approx(d, rel=1e-12)
    # lone eventual capture r/(r+d) = 5/10 (Yilmaz et al. 2014, closed form; references.md long-time limit)
    assert pair["lone_capture"] == pytest.approx(r / (r + d), rel=1e-12)
    # peak of the hitting rate at d^2/(6D) (references.md, classical first-passage result, Redner 2001)
    assert pair["peak_time"] == pytest.approx(d**2 / (6 * D), rel=1e-12)
    assert pair["peak_time_slots"] == pytest.approx(d**2 / (6 * D) / ts, rel=1e-12)
    assert data["diffusion"] == pytest.approx(D, rel=1e-12) and data["symbol_interval"] == pytest.approx(ts)


def test_response_json_keys_and_closed_form(small, tmp_path):
    png = tmp_path / "resp.png"
    data = json.loads(_run("response", str(small), "--json", "--plot", str(png)).stdout)
    for key in ("hits", "tail", "stderr", "model", "slot_edges", "emitters", "receivers"):
        assert key in data
    assert data["schema"] == 2 and isinstance(data["units"], dict)
    hits = np.asarray(data["hits"])
    assert hits.shape == (1, 1, 3)
    # slot 0 equals F(Ts) = r/(r+d) erfc(d / sqrt(4 D Ts)) (Yilmaz et al., IEEE Commun. Lett. 2014)
    from scipy.special import erfc

    r, d, D, ts = 5e-6, 5e-6, 80e-12, 0.3
    assert hits[0, 0, 0] == pytest.approx(r / (r + d) * erfc(d / np.sqrt(4 * D * ts)), rel=1e-10)
    assert png.stat().st_size > 1000


def test_rate_json_keys_and_ordering(small):
    data = json.loads(_run("rate", str(small), "--json", "--symbols", "3000", "--runs", "4", "--precision", "0.02",
                           "--markov").stdout)
    for key in ("single_slot_capacity", "certified_gap", "input_distribution", "alphabet", "iid_input",
                "information_rate", "stderr", "lower_bound", "upper_bound", "bounds", "bits_per_second",
                "bits_per_molecule", "mean_molecules", "hits", "units"):
        assert key in data, key
    assert data["schema"] == 2 and isinstance(data["units"], dict)
    # per symbol, per second and per molecule nested alike, and consistent with each other
    assert set(data["bits_per_symbol"]) == set(data["bits_per_second"]) == set(data["bits_per_molecule"])
    for key, value in data["bits_per_symbol"].items():
        assert data["bits_per_second"][key] == pytest.approx(value / data["symbol_interval"], rel=1e-12)
    assert data["mean_molecules"] <= 15 + 1e-6  # the budget holds
    b = data["bounds"]
    tol = 4 * max(data["stderr"], 1e-3)
    # I_sbs <= I_dfe <= I_iid <= I_mf (chain rule; references.md, single-letter bounds)
    assert b["sbs"]["rate"] <= b["dfe"]["rate"] + tol
    assert b["dfe"]["rate"] <= data["information_rate"] + tol
    assert data["information_rate"] <= b["mf"]["rate"] + tol
    # Blahut-Arimoto certificate (Arimoto 1972; Blahut 1972): the reported gap is non-negative and below tol
    assert 0 <= data["certified_gap"] < 1e-6
    # an optimised Markov input does at least as well as the i.i.d. law (Kavcic 2001), within standard errors
    m = data["markov_input"]
    assert m["rate"] >= data["information_rate"] - 4 * (m["stderr"] + data["stderr"])


# InputError messages read "<field> = <value>: <problem>. Fix: <fix>" (capacity/errors.py, DEVELOPERS.md), and
# the command line prints them as one line "capacity check: error: <message>"; the checks parse that line and
# compare the field path as a whole, with the word the message must also name (the right key, the receiver).
ERROR_LINE = re.compile(r"^capacity check: error: (?P<field>.+?) = (?P<value>.+?): (?P<rest>.+)$")


@pytest.mark.parametrize(
    "replace, field, mention",
    [
        (('diffusion = "80 um^2/s"', "diffusion = -1"), "medium.diffusion", "positive"),
        (('radius = "5 um"', 'radious = "5 um"'), "receiver[0].radious", '"radius"'),
        (('centre = ["10 um", 0, 0]', 'centre = ["3 um", 0, 0]'), "emitter[0].position", "receiver[0]"),
        (('symbol_interval = "300 ms"', 'symbol_interval = "300 um"'), "channel.symbol_interval", "time"),
    ],
)
def test_bad_input_exits_2_without_traceback(tmp_path, replace, field, mention):
    path = tmp_path / "bad.toml"
    path.write_text(SMALL.replace(*replace))
    proc = _run("check", str(path), check=False)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    match = ERROR_LINE.match(lines[0])
    assert match, lines[0]
    assert match["field"] == field
    assert mention in match["rest"] and "Fix:" in match["rest"]


# renamed keys (channel.particles -> particle_count, channel.time_step -> particle_step) and the renamed option
OLD_KEYS = SMALL.replace('response = "lone"', 'response = "lone"\nparticles = 700\ntime_step = "2 ms"')
NEW_KEYS = SMALL.replace('response = "lone"', 'response = "lone"\nparticle_count = 700\nparticle_step = "2 ms"')


def test_old_key_names_read_the_same_with_a_note_that_strict_ignores(tmp_path):
    old, new = tmp_path / "old.toml", tmp_path / "new.toml"
    old.write_text(OLD_KEYS)
    new.write_text(NEW_KEYS)
    proc = _run("check", str(old), "--json", "--strict")  # exit 0: a renamed key is not a doubt about the physics
    notes = [line[len("note: "):] for line in proc.stderr.splitlines() if line.startswith("note: ")]
    assert len(notes) == 2
    assert notes[0].startswith(f"channel.particles in {old} is deprecated: rename it to channel.particle_count")
    assert notes[1].startswith(f"channel.time_step in {old} is deprecated: rename it to channel.particle_step")
    data = json.loads(proc.stdout)
    assert data["deprecations"] == notes
    reference = _run("check", str(new), "--json", "--strict")
    assert "note:" not in reference.stderr and json.loads(reference.stdout)["deprecations"] == []
    assert data["parameters"] == json.loads(reference.stdout)["parameters"]  # the same scenario, as read
    shown = {p["field"]: p for p in data["parameters"]}
    assert shown["channel.particle_count"]["value"] == 700
    assert shown["channel.particle_step"]["value"] == pytest.approx(2e-3, rel=1e-15)
    assert not any(p["field"] in ("channel.particles", "channel.time_step") for p in data["parameters"])
    # any other command that loads the scenario prints the notes too
    other = _run("response", str(old), "--json")
    assert [line for line in other.stderr.splitlines() if line.startswith("note: ")] == [f"note: {n}" for n in notes]


def test_old_and_new_key_together_exits_2(tmp_path):
    path = tmp_path / "both.toml"
    path.write_text(NEW_KEYS.replace("particle_count = 700", "particle_count = 700\nparticles = 700"))
    proc = _run("check", str(path), check=False)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr
    match = ERROR_LINE.match(proc.stderr.strip())
    assert match, proc.stderr
    assert match["field"] == "channel.particles" and match["value"] == "700"
    assert "old name of channel.particle_count" in match["rest"] and "Fix: keep only channel.particle_count" in \
        match["rest"]


def test_particle_count_option_and_its_hidden_old_spelling(small):
    # (that --particle-count reaches the particle run: tests/test_particle_budget.py, refused at 1e9 molecules)
    helptext = _run("response", "--help").stdout
    assert "--particle-count N" in helptext and "--particles" not in helptext
    line = re.compile(r"^capacity response: error: (?P<field>.+?) = (?P<value>.+?): (?P<rest>.+)$")
    new = _run("response", str(small), "--particle-count", "0", check=False)
    assert new.returncode == 2 and line.match(new.stderr.strip())["field"] == "--particle-count"
    old = _run("response", str(small), "--particles", "0", check=False)  # taken as --particle-count 0
    first, error = old.stderr.strip().splitlines()
    assert old.returncode == 2 and first == "note: --particles is deprecated: use --particle-count (same meaning)"
    assert line.match(error)["field"] == "--particle-count" and line.match(error)["value"] == "0"
    both = _run("response", str(small), "--particles", "5", "--particle-count", "5", check=False)
    assert both.returncode == 2 and line.match(both.stderr.strip())["field"] == "--particles"


def test_unreadable_file_exits_2(tmp_path):
    bad = tmp_path / "notoml.toml"
    bad.write_text("name = [unclosed\n")
    for path, problem in ((tmp_path / "missing.toml", "cannot be read"), (bad, "is not valid TOML")):
        proc = _run("check", str(path), check=False)
        assert proc.returncode == 2 and "Traceback" not in proc.stderr
        match = ERROR_LINE.match(proc.stderr.strip())
        assert match, proc.stderr
        assert match["field"] == "scenario file" and match["value"] == repr(str(path))
        assert match["rest"].startswith(problem)


PAIR = textwrap.dedent(
    """
    name = "cli test two by two"
    [medium]
    diffusion = "100 um^2/s"
    [[emitter]]
    name = "left"
    position = [0, 0, 0]
    [[emitter]]
    name = "right"
    position = [0, "30 um", 0]
    [[receiver]]
    name = "a"
    centre = ["10 um", 0, 0]
    radius = "4 um"
    [[receiver]]
    name = "b"
    centre = ["10 um", "30 um", 0]
    radius = "4 um"
    [channel]
    symbol_interval = "250 ms"
    memory = 1
    background = 0.2
    response = "lone"
    [signalling]
    scheme = "spatial"
    levels = 2
    peak = 30
    budget = 10
    """
)


def test_compare_at_equal_budget_and_over_budgets(tmp_path):
    path = tmp_path / "pair.toml"
    path.write_text(PAIR)
    out = tmp_path / "out"
    data = json.loads(_run("compare", str(path), "--schemes", "amplitude,spatial", "--budgets", "4:20:3",
                           "--symbols", "1500", "--runs", "3", "--precision", "0.02", "--json", "--out",
                           str(out)).stdout)
    names = [s["scheme"] for s in data["schemes"]]
    assert names == ["amplitude", "spatial"]
    for s in data["schemes"]:
        for key in ("scheme", "budget", "single_slot_capacity", "information_rate", "stderr", "lower_bound",
                    "upper_bound", "bits_per_second", "bits_per_molecule", "detectors"):
            assert key in s
        # the budget is met: mean molecules per symbol never exceed it
        assert s["details"]["mean_molecules"] <= 10 + 1e-6
        assert s["bits_per_second"] == pytest.approx(s["information_rate"] / 0.25)
        assert all({"name", "symbol_error_rate", "rate"} <= set(d) for d in s["detectors"])
        ran = [d for d in s["detectors"] if d["rate"] is not None]
        assert ran, "at least one detector ran"
        for d in ran:
            # data processing: hard decisions cannot carry more than the soft channel's upper bound allows
            assert d["rate"] <= s["upper_bound"] + 4 * s["stderr"] + 0.05
            assert 0 <= d["symbol_error_rate"] <= 1
    rows = (out / "curves.csv").read_text().strip().splitlines()
    assert len(rows) == 1 + 2 * 3
    assert (out / "curves.png").stat().st_size > 1000
    assert (out / "compare.json").exists()


def test_markov_that_cannot_apply_is_a_named_error_exit_2(tmp_path):
    # 8 amplitude levels over 3 lags: 8^3 = 512 source states > the Markov optimiser's 256 (capacity/cli/rate.py)
    path = tmp_path / "big.toml"
    path.write_text(SMALL.replace("memory = 2", "memory = 3").replace("levels = 2", "levels = 8"))
    out = tmp_path / "out.json"
    proc = _run("rate", str(path), "--markov", "--json", check=False)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and proc.stdout == ""
    line = proc.stderr.strip().splitlines()[-1]
    assert "--markov" in line and "512" in line and "256" in line and "Fix" in line
    assert not out.exists()
