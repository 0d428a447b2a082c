"""Budget curves that carry input laws upward (``capacity.sweep.carry``) and the rate measure's recorded law.

Outside fact checked: for a fixed alphabet the capacity-cost function is non-decreasing in the cost (McEliece,
*The Theory of Information and Coding*, 2002, ch. 3; Cover & Thomas, *Elements of Information Theory*, 2006,
sec. 9.1), because every input law that meets a smaller mean-cost budget meets a larger one; the same holds for
the best i.i.d. rate with ISI. A curve of estimates may therefore dip only by its Monte Carlo noise.

The scenario: one bead, 60 ms slots (strong ISI), law search off, so each budget's law is the release-slot
Blahut–Arimoto optimum; above ~15 molecules/symbol that law spends molecules on loud symbols whose tails cost more
than they carry, and the first pass falls far beyond its noise (checked below, so that the test can fail).
"""

from __future__ import annotations

import csv
import dataclasses
import json
import shutil
from pathlib import Path

import pytest

from capacity.errors import InputError
from capacity.sweep import make_spec, point_seed, run_sweep
from capacity.sweep.carry import carry_laws, drops
from capacity.sweep.measures import evaluate

TINY = """
name = "one bead, one sender, strong ISI (carry test)"

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
symbol_interval = "60 ms"
memory = 2
background = 0.5
response = "lone"
seed = 3

[signalling]
scheme = "amplitude"
levels = 4
peak = 60
budget = 10
"""
SETTINGS = {"symbols": 4000, "runs": 4, "bound_samples": 512, "window_samples": 256, "law_search": False}
VARY = ["signalling.budget=4:60:5:log"]
QUIET = {"workers": 0, "cache_dir": None, "log": lambda text: None}


@pytest.fixture(scope="module")
def first(tmp_path_factory):
    """The tiny budget sweep (5 points, each on its own) and its spec."""
    folder = tmp_path_factory.mktemp("carry")
    path = folder / "tiny.toml"
    path.write_text(TINY)
    spec = make_spec(str(path), VARY, settings=SETTINGS)
    summary = run_sweep(spec, folder / "first", progress=False, plots=False, **QUIET)
    assert summary["points_computed"] == 5 and summary["points_failed"] == 0
    return spec, folder


def _points(folder: Path) -> list[dict]:
    with open(folder / "points.csv", newline="") as fh:
        return list(csv.DictReader(fh))


def test_carried_law_is_used_and_the_curve_does_not_fall(first):
    spec, folder = first
    rows = sorted(_points(folder / "first"), key=lambda r: float(r["budget"]))
    laws = {float(r["budget"]): json.loads(r["input_law_probabilities"]) for r in rows}
    assert all(len(v) == 4 and abs(sum(v) - 1) < 1e-12 for v in laws.values())
    # the first pass (each budget on its own) falls beyond its noise: what the second pass must repair
    before = drops([float(r["information_rate"]) for r in rows], [float(r["stderr"]) for r in rows])
    assert before["sigmas"] > 4, before

    summary = carry_laws(spec, folder / "first", folder / "carried", **QUIET)
    assert summary["points_computed"] >= 2 and summary["points_failed"] == 0
    curve = sorted(summary["rows"].values(), key=lambda r: r["budget"])
    assert len(curve) == 5
    after = drops([r["information_rate"] for r in curve], [r["stderr"] for r in curve])
    # monotone in the budget (McEliece 2002 ch. 3; Cover & Thomas 2006 sec. 9.1) up to 2 combined standard errors
    assert after["sigmas"] <= 2, after
    carried = [r for r in curve if r["input_law"].startswith("carried from budget")]
    assert carried, [r["input_law"] for r in curve]
    stored = {r["point_id"]: r for r in _points(folder / "carried")}
    for r in carried:
        # the law the point reports is the law of the budget it was carried from, to the last bit
        source = next(c for c in curve if f"{c['budget']:.3g}" == r["input_law"].split()[-1])
        assert json.loads(r["input_law_probabilities"]) == json.loads(source["input_law_probabilities"])
        assert r["carried_from"] == source["budget"]
        source = source["budget"]
        assert r["mean_molecules"] <= source + 1e-9 < r["budget"]
        # a point of its own: a new id, its seed from that id, stored in the carried sweep's points.csv
        assert r["point_id"] != r["first_point"] and r["point_id"] in stored
        assert r["seed"] == point_seed(spec.base_seed, r["point_id"])
        assert r["information_rate"] >= r["first_rate"] and r["evaluations"] >= 2
    for r in curve:
        if r["evaluations"] == 1:
            assert r["point_id"] == r["first_point"] and r["information_rate"] == r["first_rate"]


def test_finished_carry_computes_nothing(first):
    spec, folder = first
    out = folder / "carried_twice"
    once = carry_laws(spec, folder / "first", out, **QUIET)
    before = (out / "points.csv").read_bytes()
    again = carry_laws(spec, folder / "first", out, **QUIET)
    assert again["points_computed"] == 0 and again["rounds"] == 0
    assert again["points_skipped"] == once["points_computed"]
    assert (out / "points.csv").read_bytes() == before
    assert again["rows"] == once["rows"]


def test_store_without_the_law_column_is_upgraded_and_refused_for_carrying(first, tmp_path):
    # a points.csv written before the rate measure recorded its law: the sweep still resumes (nothing
    # recomputed, the column added empty), but carrying needs the laws and says how to get them
    spec, folder = first
    old = tmp_path / "old"
    shutil.copytree(folder / "first", old)
    with open(old / "points.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    columns = [c for c in rows[0] if c != "input_law_probabilities"]
    with open(old / "points.csv", "w", newline="") as fh:
        writer = csv.DictWriter(fh, columns, extrasaction="ignore", lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
    summary = run_sweep(spec, old, progress=False, plots=False, **QUIET)
    assert summary["points_computed"] == 0 and summary["points_skipped"] == 5
    upgraded = _points(old)
    assert list(upgraded[0]) == list(rows[0]) and all(r["input_law_probabilities"] == "" for r in upgraded)
    assert [r["information_rate"] for r in upgraded] == [r["information_rate"] for r in rows]
    with pytest.raises(InputError, match="no recorded input law.*move that sweep's folder away"):
        carry_laws(spec, old, tmp_path / "carried", **QUIET)


def test_candidate_law_of_the_wrong_size_is_a_named_failure(first):
    spec, _ = first
    from capacity.sweep.run import plan

    point = plan(spec)[0][0]
    result = evaluate(point.scenario, "rate", {**spec.settings, "candidate_laws": {"wrong": [0.5, 0.5]}},
                      point.seed)
    assert not result["ok"] and "candidate_laws" in result["error"] and "4 symbols" in result["error"]


def test_carrying_needs_the_rate_measure_and_a_budget_axis(first):
    spec, folder = first
    with pytest.raises(InputError, match="not an axis"):
        carry_laws(spec, folder / "first", folder / "never", along="channel.symbol_interval", **QUIET)
    with pytest.raises(InputError, match="rate measure"):
        carry_laws(dataclasses.replace(spec, measure="response"), folder / "first", folder / "never", **QUIET)
    assert not (folder / "never").exists()
