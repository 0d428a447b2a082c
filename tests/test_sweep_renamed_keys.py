"""Sweeps and the renamed channel keys (``particles`` -> ``particle_count``, ``time_step`` -> ``particle_step``).

Outside references: the committed layout sweep (``results/layout_sweep/``, written before the rename) for the
point ids and seeds; the loader for the scenario of every point.
"""

from __future__ import annotations

import csv
import json
import warnings
from pathlib import Path

import pytest
from test_sweep import CHEAP

from capacity.errors import InputError
from capacity.scenario.load import ScenarioKeyWarning
from capacity.sweep import grid_points, make_spec, parse_axis
from capacity.sweep.spec import read_table

REPO = Path(__file__).resolve().parent.parent
# the sweep tests' one-bead scenario, with the two channel keys under their old names
OLD_NAMES = CHEAP.replace('response = "lone"\n', 'response = "lone"\nparticles = 700\ntime_step = "2 ms"\n')
assert "particles = 700" in OLD_NAMES


@pytest.mark.parametrize("old, new", [("particles", "particle_count"), ("time_step", "particle_step")])
def test_old_sweep_path_is_refused_with_the_new_one(old, new):
    with pytest.raises(InputError) as err:
        parse_axis(f"channel.{old}=1,2")
    assert err.value.field == "--vary" and err.value.value == f"channel.{old}"
    assert f"renamed channel.{new}" in err.value.problem and f"vary channel.{new} instead" in err.value.fix


def test_new_paths_vary_a_file_written_with_the_old_names(tmp_path):
    path = tmp_path / "old.toml"
    path.write_text(OLD_NAMES)
    vary = ["channel.particle_count=100,200", "channel.particle_step=1ms,4ms"]
    with pytest.warns(ScenarioKeyWarning) as caught:  # the file's note, once per old key
        spec = make_spec(str(path), vary, measure="response")
    assert len(caught) == 2
    with warnings.catch_warnings():
        warnings.simplefilter("error", ScenarioKeyWarning)  # the points are built from the renamed table
        points = grid_points(spec.data, list(spec.axes), measure=spec.measure, settings=spec.settings,
                             base_seed=spec.base_seed)
    got = sorted((p.scenario.channel.particle_count, p.scenario.channel.particle_step) for p in points)
    assert got == [(100, pytest.approx(1e-3)), (100, pytest.approx(4e-3)), (200, pytest.approx(1e-3)),
                   (200, pytest.approx(4e-3))]
    # a TOML-shaped dict with the old names gives the same points, with the same notes
    import tomllib

    with pytest.warns(ScenarioKeyWarning) as caught:
        from_dict = make_spec(tomllib.loads(OLD_NAMES), vary, measure="response")
    assert [str(w.message).split(" is deprecated")[0] for w in caught] == ["channel.particles in <dict>",
                                                                            "channel.time_step in <dict>"]
    again = grid_points(from_dict.data, list(from_dict.axes), measure=from_dict.measure,
                        settings=from_dict.settings, base_seed=from_dict.base_seed)
    assert [p.point_id for p in again] == [p.point_id for p in points]


def test_point_ids_and_seeds_survive_the_rename():
    # reference: the committed layout sweep on the demo, whose ids and seeds were computed before the rename (a
    # changed id would make a resumed sweep recompute every point, with other seeds)
    folder = REPO / "results" / "layout_sweep"
    record = json.loads((folder / "sweep.json").read_text())
    with open(folder / "points.csv", newline="") as fh:
        stored = {row["point_id"]: int(row["seed"]) for row in csv.DictReader(fh)}
    axes = [parse_axis(f"{ax['field']}=" + ",".join(repr(v) for v in ax["values"])) for ax in record["axes"]]
    points = grid_points(read_table(record["scenario"])[0], axes, measure=record["measure"],
                         settings=record["settings"], base_seed=record["base_seed"])
    assert len(points) == len(stored) == 25
    assert {p.point_id: p.seed for p in points} == stored


def test_cli_sweep_prints_the_note_once_and_refuses_the_old_path(tmp_path, capsys):
    from capacity.cli import main

    path = tmp_path / "old.toml"
    path.write_text(OLD_NAMES)
    with warnings.catch_warnings(record=True) as escaped:
        warnings.simplefilter("always")
        code = main(["sweep", str(path), "--measure", "response", "--vary", "channel.particle_count=100,200",
                     "--out", str(tmp_path / "out"), "--workers", "0", "--no-plots", "--strict"])
    err = capsys.readouterr().err
    assert code == 0  # --strict: a renamed key is no warning about the physics
    assert not [w for w in escaped if issubclass(w.category, ScenarioKeyWarning)]  # printed by the CLI instead
    notes = [line for line in err.splitlines() if line.startswith("note: ")]
    assert [n.split(" is deprecated")[0] for n in notes] == [f"note: channel.particles in {path}",
                                                            f"note: channel.time_step in {path}"]
    assert main(["sweep", str(path), "--vary", "channel.particles=100,200", "--out", str(tmp_path / "x")]) == 2
    assert "--vary = 'channel.particles': channel.particles was renamed channel.particle_count" in \
        capsys.readouterr().err
