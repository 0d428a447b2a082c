"""Every figure the README quotes from a study comes from the committed results, to the digits quoted.

Each check finds a sentence of the README by a pattern, reads the numbers it quotes, and compares each with the
value in the committed results file, rounded as the README rounds it (half a unit of the last digit quoted).
When a study is re-run, this test fails until the README is updated with it.
"""

from __future__ import annotations

import csv
import json
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
README_LINES = (ROOT / "README.md").read_text().splitlines()
README = " ".join(" ".join(README_LINES).split())  # line breaks and indents as single spaces


def _rows(path):
    with open(ROOT / path, newline="") as fh:
        return list(csv.DictReader(fh))


def _quoted(pattern: str) -> list[str]:
    """The numbers captured by ``pattern`` (a regex with groups) in the README; fails when it is absent."""
    m = re.search(pattern, README)
    assert m is not None, f"README no longer contains {pattern!r}"
    return list(m.groups())


def _agrees(value: float, quoted: str) -> bool:
    decimals = len(quoted.split(".")[1]) if "." in quoted else 0
    return abs(float(value) - float(quoted)) <= 0.5 * 10.0 ** (-decimals) * (1 + 1e-9)


def _check(pairs):
    for value, quoted in pairs:
        assert _agrees(value, quoted), f"README quotes {quoted}, the results hold {value}"


def _interval_row(rows, ts):
    return min(rows, key=lambda r: abs(float(r["symbol_interval"]) - ts))


def test_symbol_interval_study():
    rows = _rows("results/symbol_interval/symbol_interval.csv")
    r60 = _interval_row(rows, 0.06)
    best = max(rows, key=lambda r: float(r["bits_per_second"]))
    assert best is r60  # the README calls 60 ms the best of the grid
    q = _quoted(r"\*\*shortest interval of the grid, ([\d.]+) ± ([\d.]+) bits/s at 60 ms\*\* \(([\d.]+) bits/symbol; "
                r"bracket ([\d.]+)–([\d.]+), (\d+) %")
    ts = float(r60["symbol_interval"])
    _check([(float(r60["bits_per_second"]), q[0]), (float(r60["stderr"]) / ts, q[1]),
            (float(r60["information_rate"]), q[2]), (float(r60["lower_bound"]), q[3]),
            (float(r60["upper_bound"]), q[4]), (100 * float(r60["bracket_relative"]), q[5])])
    q = _quoted(r"then ([\d.]+) bits/s at 90 ms .*?, ([\d.]+) at 134 ms .*?, ([\d.]+) at 200 ms .*? and "
                r"([\d.]+) at\s+1 s")
    _check([(float(_interval_row(rows, t)["bits_per_second"]), v)
            for t, v in zip((0.09, 0.134, 0.2, 1.0), q, strict=True)])
    q = _quoted(r"Bits per molecule rise with the interval, to ([\d.]+) at 1 s")
    _check([(float(_interval_row(rows, 1.0)["bits_per_molecule"]), q[0])])


def test_layout_study_table():
    rows = _rows("results/layout_sweep/points.csv")
    # the README's distance is the beads' distance from the line of the senders: the x of their centres
    table = {(round(float(r["centre_x"]) * 1e6, 6), round(float(r["radius"]) * 1e6, 6)): r for r in rows}
    head = _quoted(r"\| distance \(µm\) \\ radius \(µm\) \| ([\d.]+) \| ([\d.]+) \| ([\d.]+) \| ([\d.]+) \| "
                   r"([\d.]+) \|")
    radii = [float(h) for h in head]
    checked = 0
    for line in README_LINES:
        m = re.match(r"\s*\| (\d+) \| ([\d.*]+) \| ([\d.*]+) \| ([\d.*]+) \| ([\d.*]+) \| ([\d.*]+) \|$", line)
        if not m:
            continue
        distance = float(m.group(1))
        for radius, cell in zip(radii, m.groups()[1:], strict=True):
            row = table[(distance, radius)]
            _check([(float(row["bits_per_second"]), cell.strip("*"))])
            checked += 1
    assert checked == 25


def test_flow_interval_study():
    rec = json.loads((ROOT / "results/symbol_interval_flow/record.json").read_text())["results"]
    rows = {(r["scenario"], round(r["symbol_interval"], 6)): r for r in rec["rows"]}
    q = _quoted(r"\*\*100 ms at ([\d.]+) ± ([\d.]+) bits/s\*\*\s+\(bracket ([\d.]+)–([\d.]+) bits/symbol: (\d+) %")
    f = rows[("flow", 0.1)]
    _check([(f["bits_per_second"], q[0]), (f["stderr_bits_per_second"], q[1]), (f["lower_bound"], q[2]),
            (f["upper_bound"], q[3]), (100 * (f["upper_bound"] - f["lower_bound"]) / f["lower_bound"], q[4])])
    assert rec["best"]["flow"]["symbol_interval_s"] == pytest.approx(0.1)
    q = _quoted(r"then ([\d.]+) ± ([\d.]+) at 200 ms")
    f2 = rows[("flow", 0.2)]
    _check([(f2["bits_per_second"], q[0]), (f2["stderr_bits_per_second"], q[1])])
    q = _quoted(r"\*\*400 ms at\s+([\d.]+) ± ([\d.]+) bits/s\*\*")
    s = rows[("still", 0.4)]
    _check([(s["bits_per_second"], q[0]), (s["stderr_bits_per_second"], q[1])])
    assert rec["best"]["still"]["symbol_interval_s"] == pytest.approx(0.4)


def test_near_bead_table():
    rows = {r["gap_radii"]: r for r in _rows("results/validation/near_bead.csv")}
    checked = 0
    for line in README_LINES:
        m = re.match(r"\s*\| ([\d.]+) / ([\d.]+) \| ([\d.]+) / ([\d.]+) \| (−?[\d.]+) / ([\d.]+) ± ([\d.]+) "
                     r"\| ([\d.]+) \|", line)
        if not m:
            continue
        r = rows[m.group(1)]
        g = [x.replace("−", "-") for x in m.groups()]
        _check([(float(r["near_total_model"]), g[2]), (float(r["near_total_particles"]), g[3]),
                (float(r["far_total_model"]), g[4]), (float(r["far_total_particles"]), g[5]),
                (float(r["far_total_se"]), g[6]), (float(r["max_slot_abs_error"]), g[7])])
        checked += 1
    assert checked == 6


def test_demo_optimiser_pick():
    d = json.loads((ROOT / "results/demo/optimise.json").read_text())
    q = _quoted(r"`results/demo/optimise\.json` holds the demo run of `make demo`: it picks ([\d.]+) ms, where the "
                r"reported rate is ([\d.]+) ± ([\d.]+) bits/s")
    _check([(1e3 * d["best"]["symbol_interval"], q[0]), (d["polished"], q[1]), (d["polished_stderr"], q[2])])


def test_interval_pick_record():
    rec = json.loads((ROOT / "results/interval_pick.json").read_text())
    q = _quoted(r"picked ([\d.]+) ms on\s+the demo \(([\d.]+) ± ([\d.]+) bits/s\), (\d+) % of the best of an "
                r"(\d+)-point sweep of the reported rate from 30 ms to 1 s\s+\(([\d.]+) bits/s at (\d+) ms\), and "
                r"([\d.]+) ms on the single-bead on-off layout\s+\(`tests/data/scenarios/single_bead_ook.toml`; "
                r"([\d.]+) ± ([\d.]+) bits/s\), (\d+) % of that sweep's best \(([\d.]+) bits/s at\s+(\d+) ms")
    pairs = []
    groups = (("demo", (0, 1, 2, 3, 5, 6)), ("single_bead_ook", (7, 8, 9, 10, 11, 12)))
    for name, (pick, rate, se, pct, best, at) in groups:
        r = rec[name]
        pairs += [(1e3 * r["pick_s"], q[pick]), (r["pick_bits_per_second"], q[rate]), (r["pick_stderr"], q[se]),
                  (100 * r["ratio_to_grid_best"], q[pct]), (r["grid_best"]["bits_per_second"], q[best]),
                  (1e3 * r["grid_best"]["symbol_interval"], q[at])]
        assert r["grid_points"] == int(q[4])
    _check(pairs)


def test_schemes_study():
    rows = {r["scheme"]: r for r in _rows("results/schemes/table.csv")}
    q = _quoted(r"multiplex carries the most \(\*\*([\d.]+) ± ([\d.]+) bits/symbol, ([\d.]+)\s+bits/s\*\*, bracket "
                r"([\d.]+)–([\d.]+)\), then spatial signalling \(([\d.]+) ± ([\d.]+), bracket ([\d.]+)–([\d.]+)\)")
    m, s = rows["multiplex"], rows["spatial"]
    _check([(float(m["information_rate"]), q[0]), (float(m["stderr"]), q[1]), (float(m["bits_per_second"]), q[2]),
            (float(m["lower_bound"]), q[3]), (float(m["upper_bound"]), q[4]), (float(s["information_rate"]), q[5]),
            (float(s["stderr"]), q[6]), (float(s["lower_bound"]), q[7]), (float(s["upper_bound"]), q[8])])
    curves = _rows("results/schemes/curves.csv")
    multiplex = [r for r in curves if r["scheme"] == "multiplex"]
    peak = max(multiplex, key=lambda r: float(r["information_rate"]))
    q = _quoted(r"multiplex at [\d.]+–[\d.]+ bits/symbol from \d+ on, highest \*\*([\d.]+) ±\s+([\d.]+) "
                r"bits/symbol at a budget of (\d+)\*\* \(([\d.]+) bits/s\) while using only (\d+) molecules")
    _check([(float(peak["information_rate"]), q[0]), (float(peak["stderr"]), q[1]), (float(peak["budget"]), q[2]),
            (float(peak["bits_per_second"]), q[3]), (float(peak["mean_molecules"]), q[4])])
    # the falls of the curves below a smaller budget's value: the first pass alone, and what is left after
    # carrying laws to larger budgets (schemes.json, findings.falls)
    falls = json.loads((ROOT / "results/schemes/schemes.json").read_text())["results"]["findings"]["falls"]
    q = _quoted(r"fell\s+by up to ([\d.]+) combined standard errors \(multiplex from \*\*([\d.]+) ± ([\d.]+) at "
                r"(\d+) to ([\d.]+) ± ([\d.]+) at (\d+)\*\*\)")
    before = falls["multiplex"]["before"]
    hi = next(r for r in multiplex if float(r["budget"]) == before["below_budget"])
    lo = next(r for r in multiplex if float(r["budget"]) == before["budget"])
    _check([(max(f["before"]["sigmas"] for f in falls.values()), q[0]), (float(hi["first_rate"]), q[1]),
            (float(hi["first_stderr"]), q[2]), (float(hi["budget"]), q[3]), (float(lo["first_rate"]), q[4]),
            (float(lo["first_stderr"]), q[5]), (float(lo["budget"]), q[6])])
    q = _quoted(r"the largest fall left is \*\*([\d.]+)\s+combined standard errors\*\* \((\w+), (\d+) against "
                r"(\d+)\), then\s+(\w+) ([\d.]+), (\w+) and (\w+) none")
    after = {s: f["after"] for s, f in falls.items()}
    worst = max(after, key=lambda s: after[s]["sigmas"])
    assert q[1] == worst and {q[4], q[6], q[7]} == set(after) - {worst}
    assert after[q[6]]["sigmas"] == 0 and after[q[7]]["sigmas"] == 0
    _check([(after[worst]["sigmas"], q[0]), (after[worst]["budget"], q[2]), (after[worst]["below_budget"], q[3]),
            (after[q[4]]["sigmas"], q[5])])


def test_validation_table():
    # the eight layouts of studies/validate_responses.py, in the README's order and wording
    names = {"side by side": "side_by_side", "one behind another": "one_behind", "three around one emitter":
             "three_around", "unequal radii": "unequal_radii", "close pair": "close_spacing",
             "emitter 0.5 radius from a receiver": "emitter_near_receiver",
             "small sphere hidden close behind a larger one": "hidden_close",
             "degradation k = 2/s, two emitters": "degradation_two_emitters"}
    rows = {r["layout"]: r for r in _rows("results/validation/summary.csv")}
    checked = set()
    for line in README_LINES:
        m = re.match(r"\s*\| ([^|(]+?)(?: \([^|]*\))? \| \**([\d.]+) %\** \| ([\d.]+) % \| ([\d.]+) \|$", line)
        if not m or m.group(1) not in names:
            continue
        r = rows[names[m.group(1)]]
        _check([(100 * float(r["max_total_rel_error"]), m.group(2)), (100 * float(r["total_rel_se_at_worst"]),
                m.group(3)), (float(r["max_slot_abs_error"]), m.group(4))])
        checked.add(m.group(1))
    assert checked == set(names)
