"""``capacity sweep``: grid parsing, point ids, resumable storage, reproducibility across workers, bad input.

Outside references: numpy.linspace / numpy.geomspace for the grids; an uninterrupted in-process run for the
resumed and the 2-worker runs (same ids and seeds must give the same numbers, to the last bit); the loader's own
validation for invalid points.
"""

from __future__ import annotations

import csv
import json
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from capacity.cli import main
from capacity.errors import InputError
from capacity.sweep import grid_points, make_spec, parse_axis, point_id, run_sweep

REPO = Path(__file__).resolve().parent.parent
CHEAP = """
name = "one bead, one sender (sweep test)"

[medium]
diffusion = "79.4 um^2/s"

[[emitter]]
name = "tx"
position = ["0 um", "0 um", "0 um"]

[[receiver]]
name = "rx"
centre = ["10 um", "0 um", "0 um"]
radius = "5 um"

[channel]
symbol_interval = "200 ms"
memory = 1
background = 0.5
response = "lone"
seed = 3

[signalling]
scheme = "amplitude"
levels = 2
peak = 100
budget = 50
"""
# cheap estimator settings: the point of these tests is the machinery, not the rates' accuracy
SETTINGS = {"symbols": 500, "runs": 2, "bound_samples": 256, "window_samples": 64, "law_search": False}
CLI_SETTINGS = ["--symbols", "500", "--runs", "2", "--bound-samples", "256", "--window-samples", "64",
                "--no-law-search"]
VARY = ["channel.symbol_interval=100ms:300ms:3", "signalling.budget=20,50"]


@pytest.fixture(scope="module")
def scenario_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("sweep") / "cheap.toml"
    path.write_text(CHEAP)
    return path


@pytest.fixture(scope="module")
def cache_dir(tmp_path_factory):
    return str(tmp_path_factory.mktemp("jax-cache"))


@pytest.fixture(scope="module")
def reference(scenario_file, cache_dir, tmp_path_factory):
    """An uninterrupted serial run (one worker process) of the 3 x 2 grid: {point_id: row}. Every later run here
    uses worker processes with the same settings, so they share its compiled kernels (the compilation cache)."""
    out = tmp_path_factory.mktemp("reference")
    spec = make_spec(str(scenario_file), VARY, settings=SETTINGS)
    summary = run_sweep(spec, out, workers=1, cache_dir=cache_dir, progress=False, plots=True, log=lambda t: None)
    assert summary["points_computed"] == 6 and summary["points_failed"] == 0
    return out, _rows(out)


def _rows(folder) -> dict:
    with open(Path(folder) / "points.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    ids = [r["point_id"] for r in rows]
    assert len(ids) == len(set(ids)), "a point is stored twice"
    return {r["point_id"]: r for r in rows}


def _env(cache_dir):
    env = dict(os.environ)
    env["CAPACITY_CACHE_DIR"] = cache_dir
    return env


# -- grid text ---------------------------------------------------------------------------------------------------
def test_ranges_match_numpy_spacing():
    # reference: numpy.geomspace / numpy.linspace on the SI ends (50 ms = 0.05 s, 2 um = 2e-6 m)
    ax = parse_axis("channel.symbol_interval=50ms:400ms:4:log")
    np.testing.assert_array_equal(ax.values, np.geomspace(0.05, 0.4, 4))
    assert ax.label == "symbol_interval" and ax.spacing == "log"
    ax = parse_axis("receiver[0].radius=2 um:6 um:5")
    np.testing.assert_array_equal(ax.values, np.linspace(2e-6, 6e-6, 5))
    assert parse_axis("signalling.budget=10,20 molecules,1e2").values == (10.0, 20.0, 100.0)
    assert parse_axis("channel.memory=1:4:4").values == (1, 2, 3, 4)
    ax = parse_axis("emitter[0].position=0um,0um,0um;1um,2um,0um")
    assert ax.values == ((0.0, 0.0, 0.0), (1e-6, 2e-6, 0.0))
    assert parse_axis("receiver[*].centre[1]=1um,2um").label == "centre_y"
    assert parse_axis("channel.response=lone,shadowed").values == ("lone", "shadowed")


@pytest.mark.parametrize("text, expect", [
    ("channel.symbol_intervl=50ms:400ms:3", 'did you mean "channel.symbol_interval"'),
    ("channel.symbol_interval=50kg:400ms:3", "is not time"),
    ("channel.symbol_interval=5ms:5ms:3", "empty"),
    ("channel.symbol_interval=400ms:50ms:3", "reversed"),
    ("channel.symbol_interval=50ms:400ms:0", "give N >= 1"),
    ("channel.symbol_interval=0ms:400ms:3:log", "log spacing needs LO > 0"),
    ("signalling.budget=10,,20", "empty value"),
    ("signalling.budget=10,10", "twice"),
    ("channel.memory=1:4:3", "not whole numbers"),
    ("receiver[3].radius=5um", "has 1 receivers"),
])
def test_bad_vary_is_a_named_error(text, expect, scenario_file, tmp_path, capsys):
    out = tmp_path / "never"
    code = main(["sweep", str(scenario_file), "--vary", text, "--out", str(out), "--workers", "0"])
    err = capsys.readouterr().err
    assert code == 2
    assert "--vary" in err and expect in err, err
    assert not out.exists()


def test_invalid_point_and_huge_grid_are_refused_before_anything_is_written(scenario_file, tmp_path, capsys):
    out = tmp_path / "never"
    # radius 12 um swallows the emitter 10 um away: the loader's own validator refuses that point
    code = main(["sweep", str(scenario_file), "--vary", "receiver[0].radius=4um,12um", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "--vary" in err and "receiver[0].radius=1.2e-05" in err and "invalid scenario" in err
    code = main(["sweep", str(scenario_file), "--vary", "signalling.budget=1:400:400", "--vary",
                 "signalling.peak=100:500:400", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and "160000 points" in err and "--force" in err
    assert not out.exists()


def test_sweep_table_in_scenario_file(tmp_path):
    path = tmp_path / "with_sweep.toml"
    path.write_text(CHEAP + '\n[sweep]\nmeasure = "response"\n[sweep.vary]\n"receiver[0].radius" = ["3 um", '
                    '"4 um"]\n"channel.symbol_interval" = "100ms:200ms:2"\n')
    spec = make_spec(str(path), ["signalling.budget=20,30"])
    assert spec.measure == "response"
    assert [ax.label for ax in spec.axes] == ["radius", "symbol_interval", "budget"]
    assert spec.axes[0].values == (3e-6, 4e-6)
    with pytest.raises(InputError, match="sweep.mesure"):
        path.write_text(CHEAP + '\n[sweep]\nmesure = "rate"\n')
        make_spec(str(path), VARY)


# -- ids and seeds -----------------------------------------------------------------------------------------------
def test_point_ids_stable_and_distinct(scenario_file):
    spec = make_spec(str(scenario_file), VARY, settings=SETTINGS)
    points = grid_points(spec.data, list(spec.axes), measure=spec.measure, settings=spec.settings,
                         base_seed=spec.base_seed)
    ids = [p.point_id for p in points]
    assert len(set(ids)) == 6
    # the same values written differently (units vs SI numbers) are the same point
    same = make_spec(str(scenario_file), ["channel.symbol_interval=0.1:0.3:3", "signalling.budget=20,50"],
                     settings=SETTINGS)
    again = grid_points(same.data, list(same.axes), measure=same.measure, settings=same.settings,
                        base_seed=same.base_seed)
    assert [p.point_id for p in again] == ids
    assert [p.seed for p in again] == [p.seed for p in points]
    # other settings are other points
    assert point_id(points[0].scenario, "rate", {**spec.settings, "n_symbols": 501}) != ids[0]
    # stable across processes (hash randomisation must not enter)
    code = ("from capacity.sweep import make_spec, grid_points; import sys; s = make_spec(sys.argv[1], "
            f"{VARY!r}, settings={SETTINGS!r}); print(','.join(p.point_id for p in grid_points(s.data, "
            "list(s.axes), measure=s.measure, settings=s.settings, base_seed=s.base_seed)))")
    proc = subprocess.run([sys.executable, "-c", code, str(scenario_file)], capture_output=True, text=True,
                          cwd=REPO, env={**os.environ, "PYTHONHASHSEED": "123"}, timeout=120)
    assert proc.stdout.strip().split(",") == ids, proc.stderr


# -- storage, resume, reproducibility ----------------------------------------------------------------------------
def test_outputs_of_a_finished_sweep(reference):
    import xarray as xr

    out, rows = reference
    assert len(rows) == 6
    ds = xr.open_dataset(out / "sweep.nc", engine="scipy")
    assert ds["bits_per_second"].dims == ("symbol_interval", "budget")
    np.testing.assert_array_equal(ds["symbol_interval"].values, np.linspace(0.1, 0.3, 3))
    for pid, row in rows.items():
        i = int(np.argmin(abs(ds["symbol_interval"].values - float(row["symbol_interval"]))))
        j = int(np.argmin(abs(ds["budget"].values - float(row["budget"]))))
        assert ds["point_id"].values[i, j] == pid
        assert ds["information_rate"].values[i, j] == float(row["information_rate"])
    ds.close()
    record = json.loads((out / "sweep.json").read_text())
    assert record["points_total"] == 6 and len(record["points"]) == 6
    assert {p["point_id"]: p["seed"] for p in record["points"]} == {k: int(r["seed"]) for k, r in rows.items()}
    best = max(rows.values(), key=lambda r: float(r["bits_per_second"]))
    assert record["best"]["bits_per_second"]["point_id"] == best["point_id"]
    assert (out / "sweep_bits_per_second.png").stat().st_size > 1000


def test_finished_sweep_computes_nothing(reference, scenario_file, capsys):
    out, rows = reference
    before = (out / "points.csv").read_bytes()
    code = main(["sweep", str(scenario_file), *sum((["--vary", v] for v in VARY), []), *CLI_SETTINGS, "--out",
                 str(out), "--json", "--no-plots"])
    summary = json.loads(capsys.readouterr().out)
    assert code == 0
    assert summary["points_computed"] == 0 and summary["points_skipped"] == 6 and summary["points_total"] == 6
    assert (out / "points.csv").read_bytes() == before


def test_extended_grid_computes_only_new_points(scenario_file, cache_dir, tmp_path):
    def run(budgets):
        spec = make_spec(str(scenario_file), ["channel.symbol_interval=100ms:200ms:2", f"signalling.budget={budgets}"],
                         measure="response")
        return run_sweep(spec, tmp_path, workers=0, cache_dir=cache_dir, progress=False, plots=False,
                         log=lambda t: None)

    first = run("20,50")
    assert first["points_computed"] == 4 and first["points_skipped"] == 0
    rows = _rows(tmp_path)
    summary = run("20,50,80")
    assert summary["points_skipped"] == 4 and summary["points_computed"] == 2
    extended = _rows(tmp_path)
    assert len(extended) == 6 and all(extended[k] == v for k, v in rows.items())
    again = run("20,50,80")
    assert again["points_computed"] == 0 and again["points_skipped"] == 6
    # sweep.json keeps every run: a re-run that computes nothing does not erase how the points were made
    runs = json.loads((tmp_path / "sweep.json").read_text())["runs"]
    assert [(r["points_computed"], r["points_skipped"]) for r in runs] == [(4, 0), (2, 4), (0, 6)]
    assert all(r["wall_seconds"] >= 0 and r["written"] for r in runs)


def test_two_workers_give_the_serial_numbers(reference, scenario_file, cache_dir, tmp_path):
    # reference: the one-worker run; each point's seed comes from its id, so workers and order do not matter
    _, rows = reference
    spec = make_spec(str(scenario_file), VARY, settings=SETTINGS)
    summary = run_sweep(spec, tmp_path, workers=2, cache_dir=cache_dir, progress=False, plots=False,
                        log=lambda t: None)
    assert summary["points_computed"] == 6
    two = _rows(tmp_path)
    assert set(two) == set(rows)
    for pid, row in rows.items():
        for key in ("information_rate", "stderr", "lower_bound", "upper_bound", "bits_per_second", "seed"):
            assert two[pid][key] == row[key], (pid, key)


def test_killed_sweep_resumes_with_every_point_once(reference, scenario_file, cache_dir, tmp_path):
    # reference: the uninterrupted run; SIGKILL a real sweep (its process group: driver, scheduler and worker)
    # after its first stored points
    # (12 points, so that the kill lands mid-sweep even when a busy machine makes the polling late)
    _, rows = reference
    out = tmp_path / "killed"
    vary = [VARY[0], "signalling.budget=20,50,70,90"]
    cmd = [sys.executable, "-m", "capacity.cli", "sweep", str(scenario_file), *sum((["--vary", v] for v in vary), []),
           *CLI_SETTINGS, "--out", str(out), "--workers", "1", "--quiet", "--no-plots"]
    proc = subprocess.Popen(cmd, cwd=REPO, env=_env(cache_dir), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            start_new_session=True)
    deadline = time.monotonic() + 180
    stored = 0
    while time.monotonic() < deadline and proc.poll() is None:
        path = out / "points.csv"
        stored = path.read_text().count("\n") - 1 if path.exists() else 0
        if stored >= 2:
            break
        time.sleep(0.05)
    assert proc.poll() is None, "the sweep ended before it could be killed: " + proc.stderr.read().decode()
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)
    partial = _rows(out)
    assert 2 <= len(partial) < 12
    again = subprocess.run(cmd[:-2] + ["--json"], cwd=REPO, env=_env(cache_dir), capture_output=True, text=True,
                           timeout=300)
    assert again.returncode == 0, again.stderr
    summary = json.loads(again.stdout)
    assert summary["points_skipped"] == len(partial) and summary["points_computed"] == 12 - len(partial)
    resumed = _rows(out)
    assert len(resumed) == 12 and set(rows) <= set(resumed)
    for pid, row in rows.items():
        timing = ("seconds", "cpu_seconds")
        assert {k: v for k, v in resumed[pid].items() if k not in timing} == \
               {k: v for k, v in row.items() if k not in timing}


# -- failures ----------------------------------------------------------------------------------------------------
def test_failing_point_is_recorded_and_the_sweep_goes_on(scenario_file, cache_dir, tmp_path, capsys):
    # memory "auto" with a tolerance of 1e-9: the lone hitting density decays like t^(-3/2), so no memory up to
    # the cap reaches it and channel_response raises for that point only
    path = tmp_path / "auto.toml"
    path.write_text(CHEAP.replace("memory = 1", 'memory = "auto"'))
    out = tmp_path / "fail"
    code = main(["sweep", str(path), "--measure", "response", "--vary", "channel.memory_tolerance=0.05,1e-9",
                 "--out", str(out), "--workers", "0", "--json", "--compile-cache", cache_dir])
    captured = capsys.readouterr()
    summary = json.loads(captured.out)
    assert code == 1
    assert summary["points_failed"] == 1 and summary["points_computed"] == 1
    assert "memory_tolerance=1e-09" in captured.err and "channel.memory" in captured.err
    with open(out / "failures.csv", newline="") as fh:
        failed = list(csv.DictReader(fh))
    assert len(failed) == 1 and float(failed[0]["memory_tolerance"]) == 1e-9 and failed[0]["error"]
    assert len(_rows(out)) == 1
    record = json.loads((out / "sweep.json").read_text())
    assert record["points_failed"] == 1


# -- cluster address ---------------------------------------------------------------------------------------------
def test_unreachable_scheduler_is_a_named_error_within_10_s(scenario_file, tmp_path):
    with socket.socket() as s:  # a free local port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    out = tmp_path / "never"
    started = time.monotonic()
    proc = subprocess.run([sys.executable, "-m", "capacity.cli", "sweep", str(scenario_file), "--vary", VARY[1],
                           "--out", str(out), "--scheduler", f"tcp://127.0.0.1:{port}"], cwd=REPO,
                          capture_output=True, text=True, timeout=60)
    elapsed = time.monotonic() - started
    assert proc.returncode == 2, proc.stderr
    assert "--scheduler" in proc.stderr and "no scheduler answered" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert elapsed < 10.0
    assert not out.exists()


@pytest.mark.slow
def test_in_process_run_gives_the_worker_numbers(reference, scenario_file, cache_dir, tmp_path):
    # reference: the one-worker run (XLA on the one core the worker is bound to); here the points run in the test
    # process, where XLA splits sums over every core: the same seeds and estimators, so equal up to round-off
    # (the sweep benchmark saw relative differences up to 3e-14), never a different Monte Carlo draw
    _, rows = reference
    spec = make_spec(str(scenario_file), VARY, settings=SETTINGS)
    run_sweep(spec, tmp_path, workers=0, cache_dir=cache_dir, progress=False, plots=False, log=lambda t: None)
    here = _rows(tmp_path)
    for pid, row in rows.items():
        assert here[pid]["seed"] == row["seed"]
        for key in ("information_rate", "stderr", "lower_bound", "upper_bound", "bits_per_second"):
            assert float(here[pid][key]) == pytest.approx(float(row[key]), rel=1e-12, abs=1e-15), (pid, key)


# -- flow, reactive, pulse and wall fields -----------------------------------------------------------------------
def _applied(scenario: str, text: str):
    """The scenario loaded after one --vary value is written into its table (the sweep's own path)."""
    import warnings

    from capacity.scenario.load import scenario_from_dict
    from capacity.sweep.fields import set_value
    from capacity.sweep.spec import read_table

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # deprecated key names in the built-in files are not the point here
        data, _ = read_table(scenario)
        ax = parse_axis(text)
        (value,) = ax.values
        return scenario_from_dict(set_value(data, ax.field, list(value) if isinstance(value, tuple) else value))


@pytest.mark.parametrize("scenario, text, read, expect", [
    # SI values worked out by hand: 1 um/s = 1e-6 m/s, 1 cm/s = 1e-2 m/s, 1 ms = 1e-3 s, 1 um = 1e-6 m
    ("channel_flow", "medium.flow=25um/s,0um/s,0um/s", lambda s: s.medium.flow, (25e-6, 0.0, 0.0)),
    ("demo", "medium.flow[1]=0.003 cm/s", lambda s: s.medium.flow, (0.0, 30e-6, 0.0)),  # demo: no flow key
    ("channel_flow", "medium.flow[0]=1e-5", lambda s: s.medium.flow, (1e-5, 0.0, 0.0)),  # bare number: SI
    ("channel_flow", "receiver[0].reaction_rate=0.006 cm/s", lambda s: s.receivers[0].reaction_rate, 60e-6),
    ("demo", "emitter[*].pulse=5ms", lambda s: tuple(e.pulse for e in s.emitters), (5e-3, 5e-3)),
    ("demo", "emitter[1].pulse=0.02", lambda s: tuple(e.pulse for e in s.emitters), (0.0, 0.02)),
    ("channel_flow", "wall[1].point[2]=12um", lambda s: s.walls[1].point, (0.0, 0.0, 12e-6)),
    ("channel_flow", "wall[0].point=0um,0um,-8um", lambda s: s.walls[0].point, (0.0, 0.0, -8e-6)),
    ("channel_flow", "wall[0].normal=0,0,2", lambda s: s.walls[0].normal, (0.0, 0.0, 2.0)),
])
def test_new_physics_fields_reach_the_loaded_scenario(scenario, text, read, expect):
    assert read(_applied(scenario, text)) == pytest.approx(expect, rel=1e-12, abs=0.0)


def test_new_physics_fields_labels_and_units():
    ax = parse_axis("medium.flow[0]=0um/s:40um/s:3")
    assert ax.label == "flow_x" and ax.field.kind == "velocity"
    np.testing.assert_array_equal(ax.values, np.linspace(0.0, 40e-6, 3))  # reference: numpy.linspace in SI
    assert parse_axis("wall[1].point[2]=8um,10um").label == "point_z"
    ax = parse_axis("medium.flow=10um/s,0,0;40um/s,0,0")
    assert ax.values == ((10e-6, 0.0, 0.0), (40e-6, 0.0, 0.0))
    from capacity.sweep.grid import check_axes

    both = check_axes([parse_axis("wall[0].point[2]=-10um"), parse_axis("wall[1].point[2]=10um")])
    assert [a.label for a in both] == ["wall0_point_z", "wall1_point_z"]


@pytest.mark.parametrize("text, expect", [
    ("medium.flow[0]=40um", "is not velocity"),
    ("medium.flow=40um/s,0um/s", "is not a vector x,y,z"),
    ("receiver[0].reaction_rate=5 1/s", "is not velocity"),
    ("emitter[0].pulse=5um", "is not time"),
    ("wall[0].normal[2]=1um", "is not a number"),
    ("medium.diffusion[0]=1", "is not a vector"),
    ("medium.flow[3]=1um/s", "index is above 2"),
    ("wall[0].nromal=0,0,1", 'did you mean "wall[0].normal"'),
])
def test_bad_physics_values_are_named_errors(text, expect):
    with pytest.raises(InputError) as info:
        parse_axis(text)
    assert info.value.field == "--vary" and expect in str(info.value), str(info.value)


def test_flow_across_a_wall_is_refused_by_the_loader_before_anything_runs(tmp_path):
    # reference: the loader's own rule (a uniform flow must run parallel to the walls); channel_flow's walls are
    # normal to z, so a z component is refused at that point, naming the point
    with pytest.raises(InputError, match=r"medium\.flow\[2\]=1e-05.*invalid scenario.*across wall\[0\]"):
        spec = make_spec("channel_flow", ["medium.flow[2]=0,10um/s"], measure="response")
        run_sweep(spec, tmp_path / "never", workers=0, progress=False, plots=False, log=lambda t: None)
    assert not (tmp_path / "never").exists()


# -- the compare measure and an existing scheduler ---------------------------------------------------------------
TWO = CHEAP.replace('''[[receiver]]''', '''[[emitter]]
name = "tx2"
position = ["0 um", "24 um", "0 um"]

[[receiver]]
name = "rx2"
centre = ["10 um", "24 um", "0 um"]
radius = "5 um"

[[receiver]]''').replace('scheme = "amplitude"', 'scheme = "hybrid"').replace("peak = 100", "peak = 60")


def test_compare_measure_equals_compare_schemes(cache_dir, tmp_path):
    # reference: capacity.compare.compare_schemes called directly (the non-engine path, as `capacity compare`)
    # on the same scenario with the point's seed; then each scheme's rate against its own bracket
    from capacity.compare import compare_schemes
    from capacity.physics.response import channel_response

    path = tmp_path / "two.toml"
    path.write_text(TWO)
    spec = make_spec(str(path), ["signalling.budget=15,30"], measure="compare",
                     settings={"symbols": 400, "runs": 2, "schemes": "amplitude,spatial"})
    summary = run_sweep(spec, tmp_path / "cmp", workers=0, cache_dir=cache_dir, progress=False, plots=False,
                        log=lambda t: None)
    assert summary["points_computed"] == 2 and summary["points_failed"] == 0
    rows = _rows(tmp_path / "cmp")
    points = grid_points(spec.data, list(spec.axes), measure="compare", settings=spec.settings,
                         base_seed=spec.base_seed)
    for p in points:
        row = rows[p.point_id]
        assert int(row["seed"]) == p.seed
        response = channel_response(p.scenario, None, seed=p.seed)
        records = compare_schemes(p.scenario, response, ["amplitude", "spatial"], n_symbols=400, n_runs=2,
                                  detector_symbols=400, seed=p.seed)
        assert [r["scheme"] for r in records] == ["amplitude", "spatial"]
        for rec in records:
            s = rec["scheme"]
            for key in ("information_rate", "stderr", "lower_bound", "upper_bound", "bits_per_second",
                        "bits_per_molecule", "single_slot_capacity", "mean_molecules"):
                assert float(row[f"{s}_{key}"]) == rec[key], (s, key)
            for key in ("rate_method", "lower_bound_method", "upper_bound_method", "input_law"):
                assert row[f"{s}_{key}"] == rec[key], (s, key)
            tried = [d for d in rec["detectors"] if d.get("symbol_error_rate") is not None]
            best = min(tried, key=lambda d: d["symbol_error_rate"])
            assert row[f"{s}_best_detector"] == best["name"]
            assert float(row[f"{s}_best_detector_ser"]) == best["symbol_error_rate"]
            # the rate lies in its own bracket up to Monte Carlo noise: 4 standard errors of the difference
            # between the rate and each bound (each bound keeps its own SE in the record)
            d = rec["details"]
            lo = d["lower_bounds"][row[f"{s}_lower_bound_method"]]
            up = d["upper_bounds"][row[f"{s}_upper_bound_method"]]
            rate, se = float(row[f"{s}_information_rate"]), float(row[f"{s}_stderr"])
            assert lo["rate"] == float(row[f"{s}_lower_bound"]) and up["rate"] == float(row[f"{s}_upper_bound"])
            assert lo["rate"] - 4 * np.hypot(se, lo["stderr"]) <= rate <= up["rate"] + 4 * np.hypot(se, up["stderr"])
        top = max(records, key=lambda r: r["bits_per_second"])
        assert row["best_scheme"] == top["scheme"] and float(row["best_bits_per_second"]) == top["bits_per_second"]


def test_existing_scheduler_gives_the_serial_numbers_and_stays_up(reference, scenario_file, cache_dir, tmp_path):
    # reference: the uninterrupted one-worker run; here a cluster started outside the sweep (as `dask scheduler` +
    # `dask worker` would be) is given by its address, used, and left running
    import logging

    from distributed import Client, LocalCluster

    from capacity.sweep.engine import WORKER_ENV

    _, rows = reference
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None,
                      scheduler_kwargs={"dashboard_address": "127.0.0.1:0"}, silence_logs=logging.CRITICAL,
                      env=dict(WORKER_ENV)) as cluster:
        spec = make_spec(str(scenario_file), [VARY[0], "signalling.budget=20"], settings=SETTINGS)
        summary = run_sweep(spec, tmp_path, scheduler=cluster.scheduler_address, cache_dir=cache_dir,
                            progress=False, plots=False, log=lambda t: None)
        assert summary["points_computed"] == 3 and summary["points_failed"] == 0
        got = _rows(tmp_path)
        assert len(got) == 3 and set(got) <= set(rows)
        for pid, row in got.items():
            for key in ("information_rate", "stderr", "lower_bound", "upper_bound", "bits_per_second", "seed"):
                assert row[key] == rows[pid][key], (pid, key)
        record = json.loads((tmp_path / "sweep.json").read_text())
        assert cluster.scheduler_address in json.dumps(record)
        # the sweep closed its own client only: the scheduler and its worker still answer
        with Client(cluster.scheduler_address, timeout="10s", set_as_default=False) as client:
            assert len(client.scheduler_info()["workers"]) == 1
            assert client.submit(sum, [1, 2], pure=False).result(timeout=30) == 3


def test_hits_measure_holds_every_slot_of_the_response(scenario_file, cache_dir, tmp_path):
    # reference: capacity.channel_response called directly (lone closed forms) at each point
    from capacity.physics.response import channel_response

    spec = make_spec(str(scenario_file), ["receiver[0].radius=3um,5um"], measure="hits")
    run_sweep(spec, tmp_path / "hits", workers=0, cache_dir=cache_dir, progress=False, plots=False,
              log=lambda t: None)
    rows = _rows(tmp_path / "hits")
    for p in grid_points(spec.data, list(spec.axes), measure="hits", settings=spec.settings,
                         base_seed=spec.base_seed):
        response = channel_response(p.scenario)
        row = rows[p.point_id]
        for lag in range(2):  # memory = 1 in this scenario
            assert float(row[f"hits_e0_r0_l{lag}"]) == response.hits[0, 0, lag]
            assert row[f"hits_se_e0_r0_l{lag}"] == "nan"  # the lone model has no Monte Carlo error
        assert float(row["tail_e0_r0"]) == response.tail[0, 0]
    path = tmp_path / "auto.toml"
    path.write_text(CHEAP.replace("memory = 1", 'memory = "auto"'))
    with pytest.raises(InputError, match="channel.memory.*--measure hits"):
        run_sweep(make_spec(str(path), ["receiver[0].radius=3um"], measure="hits"), tmp_path / "never", workers=0,
                  progress=False, plots=False, log=lambda t: None)
    assert not (tmp_path / "never").exists()


@pytest.mark.slow
def test_schemes_study_quick_run_and_resume(tmp_path):
    # the study on the engine: its files with the schema-2 columns; a second run computes nothing and rewrites
    # the same table (reference: the first run's own files)
    cmd = [sys.executable, str(REPO / "studies" / "schemes_vs_budget.py"), "--quick", "--out", str(tmp_path)]
    subprocess.run(cmd, check=True, cwd=REPO, timeout=1200, capture_output=True)
    for name in ("table.csv", "table.md", "curves.csv", "curves.png", "curves_per_second.png", "schemes.json"):
        assert (tmp_path / name).stat().st_size > 0, name
    with open(tmp_path / "curves.csv", newline="") as fh:
        curves = list(csv.DictReader(fh))
    assert len(curves) == 4 * 3 and {"single_slot_capacity", "rate_method", "lower_bound_method",
                                     "upper_bound_method"} <= set(curves[0])
    table = (tmp_path / "table.csv").read_text()
    again = subprocess.run(cmd, check=True, cwd=REPO, timeout=600, capture_output=True, text=True)
    assert "1 of 1 points already" in again.stderr and "12 of 12 points already" in again.stderr
    assert (tmp_path / "table.csv").read_text() == table
    record = json.loads((tmp_path / "schemes.json").read_text())
    assert record["results"]["sweeps"]["budget_sweep"]["points_computed"] == 0
