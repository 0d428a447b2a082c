"""Design optimiser: for each tunable alone the optimum matches a dense grid search of the same objective
within 1 %; the result record, the written scenario and the command line.

Layouts of our own: one emitter and one absorbing sphere (radius 5 um, gap 5 um, D = 1e-10 m^2/s); for the
slow checks two emitters and two spheres.
"""

import json

import numpy as np
import pytest

from capacity import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.cli import main
from capacity.design.objectives import Objective
from capacity.design.optimise import _start_points, build_problem, optimise_design
from capacity.design.params import base_physical, constrain, feasible, unconstrain
from capacity.design.scenario_toml import scenario_toml
from capacity.scenario.load import load_scenario


def single(ts=0.2, memory=5, levels=2, budget=None):
    return Scenario("single link", Medium(1e-10), (Emitter("e", (0.0, 0.0, 0.0)),),
                    (Receiver("r", (10e-6, 0.0, 0.0), 5e-6),),
                    Channel(ts, memory=memory, background=(0.5,), response="lone", seed=3),
                    Signalling(levels=levels, peak=100.0, budget=budget))


def pair():
    return Scenario("two links", Medium(1e-10),
                    (Emitter("a", (0.0, 0.0, 0.0)), Emitter("b", (0.0, 24e-6, 0.0))),
                    (Receiver("r0", (12e-6, 2e-6, 0.0), 5e-6), Receiver("r1", (12e-6, 22e-6, 0.0), 5e-6)),
                    Channel(0.2, memory=3, background=(0.5, 0.5), response="shadowed"),
                    Signalling(scheme="multiplex", levels=2, peak=60.0))


def grid_search(scenario, name, objective, values, rate="mean-isi"):
    """Dense grid of the same objective (Blahut-Arimoto re-solved at each point): (best value, best x)."""
    problem = build_problem(scenario, (name,), objective, rate=rate)
    obj = Objective(problem)
    out = []
    for v in values:
        u = unconstrain(problem.space, {name: np.asarray(v)})
        ok = feasible(problem.space, constrain(problem.space, u))
        out.append(obj.evaluate(u).value if ok else -np.inf)
    k = int(np.argmax(out))
    return out[k], values[k], len(values)


def test_default_rate_with_memory_is_isi_window_and_matches_its_grid():
    # the default objective with memory > 0 is the windowed decision-feedback bound; the optimiser's pick matches a
    # brute-force grid of the same objective (common random numbers: the grid sees the same draws) within 3 %
    # (about three Monte Carlo standard errors of the 1024-sample objective)
    sc = single(memory=6)
    res = optimise_design(sc, ("symbol_interval",), "bits-per-second", starts=1, steps=40, progress=False,
                          do_polish=False)
    assert res.rate == "isi-window"
    grid = np.geomspace(0.004, 0.6, 40)  # 13 % steps
    best, at, n_grid = grid_search(sc, "symbol_interval", "bits-per-second", grid, rate="isi-window")
    assert best * (1 - 0.03) <= res.value <= best * (1 + 0.03)
    assert at / 1.15 <= res.best["symbol_interval"] <= at * 1.15
    assert res.evaluations < n_grid * 2
    # and it is not the mean-isi objective's pick, which undercounts late arrivals at short intervals
    envelope = optimise_design(sc, ("symbol_interval",), "bits-per-second", rate="mean-isi", starts=1, steps=40,
                               progress=False, do_polish=False)
    assert res.best["symbol_interval"] < envelope.best["symbol_interval"]


def test_symbol_interval_matches_grid_search():
    sc = single()
    res = optimise_design(sc, ("symbol_interval",), "bits-per-second", rate="mean-isi",
                          starts=1, steps=40, progress=False,
                          do_polish=False)
    grid = np.geomspace(0.03, 0.6, 40)  # 8 % steps
    best, at, n_grid = grid_search(sc, "symbol_interval", "bits-per-second", grid)
    # the optimiser must do at least as well as the grid, to 1 % (brute-force grid search)
    assert res.value >= best * (1 - 0.01)
    assert res.value <= best * (1 + 0.01)
    assert at / 1.09 <= res.best["symbol_interval"] <= at * 1.09
    assert res.evaluations < n_grid
    assert res.rate == "mean-isi" and res.objective == "bits-per-second"
    assert res.scenario.channel.symbol_interval == pytest.approx(res.best["symbol_interval"])
    assert len(res.history) >= 1 and {"value", "step", "symbol_interval"} <= set(res.history[0])


def test_gap_matches_grid_search_isi_as_noise():
    # closer is always better for a lone absorbing sphere, so the optimum is the minimum gap (0.5 um here)
    sc = single(ts=0.1, memory=3)
    res = optimise_design(sc, ("gap",), "bits-per-molecule", rate="isi-as-noise", starts=2, steps=40,
                          progress=False, do_polish=False)
    grid = np.linspace(0.5e-6, 15e-6, 60)
    best, at, _ = grid_search(sc, "gap", "bits-per-molecule", grid, rate="isi-as-noise")
    assert at == pytest.approx(0.5e-6)
    assert res.value >= best * (1 - 0.01)  # brute-force grid search
    assert res.value <= best * (1 + 0.01)
    assert len(res.starts) == 2
    assert res.geometry["gaps"][0] == pytest.approx(res.best["gap"])


def test_command_writes_scenario_json_and_plots(tmp_path):
    path = tmp_path / "single.toml"
    path.write_text(scenario_toml(single()))
    assert load_scenario(path) == single()  # the writer round-trips (tomllib via the project loader)
    out = tmp_path / "run"
    code = main(["optimise", str(path), "--tune", "symbol_interval", "--objective", "bits-per-second",
                 "--starts", "1", "--steps", "12", "--json", "--out", str(out)])
    assert code == 0
    record = json.loads((out / "optimise.json").read_text())
    for key in ("best", "objective", "value", "lower_bound", "upper_bound", "evaluations", "history"):
        assert key in record
    assert (out / "start_0.json").exists()
    assert (out / "history.png").stat().st_size > 0
    assert (out / "objective_vs_symbol_interval.png").stat().st_size > 0
    new = load_scenario(out / "optimised.toml")
    assert new.channel.symbol_interval == pytest.approx(record["best"]["symbol_interval"], rel=1e-12)
    # polish: the trellis rate sits between its bounds, all in bits/s (ISI-as-noise <= i.i.d. rate <= matched
    # filter, Shamai, Ozarow & Wyner 1991), allowing three standard errors of the simulated rate
    se = record["information_rate_stderr"]
    assert record["lower_bound"] <= record["information_rate"] + 3 * se
    assert record["information_rate"] <= record["upper_bound"] + 3 * se


def test_bad_requests_exit_with_status_2(tmp_path, capsys):
    path = tmp_path / "single.toml"
    path.write_text(scenario_toml(single()))
    assert main(["optimise", str(path), "--tune", "spacing", "--objective", "bits-per-second"]) == 2
    assert "two receivers" in capsys.readouterr().err
    assert main(["optimise", str(path), "--tune", "symbol_interval", "--objective", "bits-per-second",
                 "--starts", "0"]) == 2


@pytest.mark.slow
@pytest.mark.parametrize("name,grid", [
    ("spacing", np.linspace(1.05, 2.5, 30)),
    ("radius", np.linspace(0.3, 1.3, 30)),
])
def test_geometry_tunables_match_grid_search(name, grid):
    # bounded to the grid's range: a larger radius always catches more (the optimum is the upper bound)
    sc = pair()
    res = optimise_design(sc, (name,), "bits-per-second", rate="mean-isi",
                          starts=2, steps=40, progress=False, do_polish=False,
                          bounds={name: (float(grid[0]), float(grid[-1]))})
    best, at, _ = grid_search(sc, name, "bits-per-second", grid)
    assert res.value >= best * (1 - 0.01)  # brute-force grid search
    assert res.value <= best * (1 + 0.01)


@pytest.mark.slow
def test_levels_and_split_match_grid_search():
    # bits per symbol at a binding budget of 30 molecules. (Bits per molecule over the levels is multimodal: at a
    # binding budget it is C(B)/B, whose gradient favours large sparse levels, while levels too small to reach the
    # budget give a higher C/M; a local method finds the former. Measured, not asserted.)
    sc = single(levels=3, memory=2, budget=30.0)
    res = optimise_design(sc, ("levels",), "bits-per-symbol", rate="mean-isi",
                          starts=2, steps=60, progress=False,
                          do_polish=False)
    problem = build_problem(sc, ("levels",), "bits-per-symbol", rate="mean-isi")
    obj = Objective(problem)
    axis = np.linspace(5.0, 99.0, 25)
    vals = [obj.evaluate(unconstrain(problem.space, {"levels": np.array([a, b])})).value
            for a in axis for b in axis if a < b]
    assert res.value >= max(vals) * (1 - 0.01)  # brute-force grid search
    sc2 = pair()
    res = optimise_design(sc2, ("split",), "bits-per-second", rate="mean-isi",
                          starts=1, steps=40, progress=False,
                          do_polish=False)
    best, _, _ = grid_search_split(sc2)
    assert res.value >= best * (1 - 0.01)


def grid_search_split(sc):
    problem = build_problem(sc, ("split",), "bits-per-second", rate="mean-isi")
    obj = Objective(problem)
    w = np.linspace(0.02, 0.98, 49)
    vals = [obj.evaluate(unconstrain(problem.space, {"split": np.array([a, 1 - a])})).value for a in w]
    k = int(np.argmax(vals))
    return vals[k], w[k], len(w)


def test_start_points_are_seeded_and_feasible():
    sc = pair()
    problem = build_problem(sc, ("spacing", "symbol_interval"), "bits-per-second")
    a = _start_points(problem.space, 5, seed=5)
    b = _start_points(problem.space, 5, seed=5)
    base = unconstrain(problem.space, base_physical(problem.space))
    for k in base:  # start 0 is the given design; the others are reproducible from the seed
        assert float(a[0][k]) == pytest.approx(float(base[k]))
        assert [float(p[k]) for p in a] == [float(p[k]) for p in b]
    assert len({float(p["spacing"]) for p in a}) == 5
    for p in a:
        assert feasible(problem.space, constrain(problem.space, p))


def demo_like():
    """Two emitters 30 um apart, each facing an absorbing bead (radius 5 um, surface gap 6 um), D = 1e-10 m^2/s,
    on-off keying on both at once (multiplex), 100-molecule peak, background 0.5 counts per slot."""
    return Scenario("bead pair", Medium(1e-10), (Emitter("a", (0.0, 0.0, 0.0)), Emitter("b", (0.0, 30e-6, 0.0))),
                    (Receiver("r0", (11e-6, 0.0, 0.0), 5e-6), Receiver("r1", (11e-6, 30e-6, 0.0), 5e-6)),
                    Channel(0.2, memory=8, background=(0.5, 0.5), response="shadowed", seed=1),
                    Signalling(scheme="multiplex", levels=2, peak=100.0))


@pytest.mark.slow
def test_demo_like_layout_best_symbol_interval_and_bits_per_molecule():
    # measured 2026-12-02: best Ts 0.149 s (8.24 bits/s, envelope rate), best OOK level 14.9 molecules at that Ts
    # (0.0180 bits/molecule); both checked here against dense grids of the same objective (brute force)
    sc = demo_like()
    res = optimise_design(sc, ("symbol_interval",), "bits-per-second", rate="mean-isi",
                          starts=1, steps=30, progress=False,
                          do_polish=False)
    best, at, _ = grid_search(sc, "symbol_interval", "bits-per-second", np.geomspace(0.02, 1.0, 30))
    assert res.value >= best * (1 - 0.01)
    assert at / 1.15 <= res.best["symbol_interval"] <= at * 1.15
    sc2 = sc.with_channel(symbol_interval=res.best["symbol_interval"])
    res2 = optimise_design(sc2, ("levels",), "bits-per-molecule", rate="mean-isi",
                          starts=1, steps=30, progress=False,
                           do_polish=False)
    levels = [np.array([v]) for v in np.linspace(2, 99.9, 30)]
    best2, _, _ = grid_search(sc2, "levels", "bits-per-molecule", levels)
    assert res2.value >= best2 * (1 - 0.01)


@pytest.mark.slow
def test_interval_pick_holds_against_a_sweep_of_the_reported_rate():
    # acceptance: on the single-bead on-off layout the optimiser's interval gives, by what `capacity rate` reports,
    # at least 97 % of the best bits/s over a log grid of 8 intervals from 30 ms to 1 s (brute-force sweep)
    import importlib.util
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "benchmarks" / "bench_interval_pick.py"
    spec = importlib.util.spec_from_file_location("bench_interval_pick", path)
    bench = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(bench)
    rec = bench.interval_pick(str(bench.SINGLE))
    assert rec["grid_points"] >= 8
    assert rec["ratio_to_grid_best"] >= 0.97
