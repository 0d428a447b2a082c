"""``capacity rate SCENARIO``: capacity and information rates of the scenario's signalling scheme."""

from __future__ import annotations

import sys

import numpy as np

from capacity.cli._common import (
    SAFETY,
    add_effort_arguments,
    add_scenario_argument,
    apply_overrides,
    dump_json,
    effort_of,
    fmt,
    load,
)


def add_parser(sub) -> None:
    p = sub.add_parser(
        "rate",
        help="rate with ISI and its bracket, release-slot capacity, per symbol, second and molecule",
        description=(
            "For the scenario's signalling scheme: the information rate with ISI at the better of two i.i.d. input "
            "laws (the release-slot optimum, and one optimised for the channel with ISI), with its standard error "
            "and its bracket (the tightest lower and upper bounds computed, each named: forward recursion over the "
            "ISI trellis or its reduced-state bound, a windowed decision-feedback bound that counts late "
            "arrivals, the auxiliary-channel and matched-filter upper bounds); the release-slot capacity at the "
            "molecule budget (Blahut-Arimoto with its certified gap); each in bits per symbol, per second and per "
            "molecule. Progress goes to stderr when it is a terminal (--quiet turns it off)."
        ),
    )
    add_scenario_argument(p)
    p.add_argument("--model", choices=("lone", "shadowed", "particles"), help="response model override")
    p.add_argument("--budget", type=float, metavar="MOLECULES", help="mean molecules per symbol (override)")
    add_effort_arguments(p)
    p.add_argument("--seed", type=int, metavar="S", help="random seed (default: the scenario's)")
    p.add_argument("--markov", action="store_true",
                   help="also optimise a Markov input law over the ISI trellis (generalised Blahut-Arimoto; only "
                        "where S^L <= 256 states)")
    p.add_argument("--force", action="store_true",
                   help="with --model particles: run even when a timed pilot estimates more than an hour")
    p.add_argument("--json", action="store_true", help="print JSON")
    p.add_argument("--quiet", action="store_true", help="no progress on stderr")
    p.set_defaults(func=run)


def compute(scenario, *, model=None, budget=None, n_symbols=None, n_runs=None, seed=None, progress=False,
            effort="full", force=False):
    """Response, alphabet and rates of one scenario; returns (response, alphabet, LinkRates).

    effort: an :class:`capacity.effort.Effort` or its name; ``n_symbols``/``n_runs`` override it.
    progress: show the stages on stderr (tqdm), when stderr is a terminal."""
    from capacity.effort import effort as make_effort
    from capacity.physics.response import channel_response
    from capacity.rates import link_rates
    from capacity.schemes.builders import build_alphabet

    bar = None
    if progress and sys.stderr.isatty():
        from tqdm.auto import tqdm

        bar = tqdm(total=len(STAGES), desc="rate", unit="stage", leave=False, file=sys.stderr)

    def stage(name):
        if bar is not None:
            bar.set_postfix_str(name)
            bar.update(1)

    try:
        if budget is not None:
            scenario = scenario.with_signalling(budget=budget)
        stage("channel response")
        response = channel_response(scenario, model, seed=seed, force=force)
        alphabet = build_alphabet(scenario.signalling, len(scenario.emitters)).named(e.name for e in scenario.emitters)
        rates = link_rates(scenario, response, alphabet, seed=seed, stage=stage,
                           effort=make_effort(effort, n_symbols=n_symbols, n_runs=n_runs))
    finally:
        if bar is not None:
            bar.close()
    return response, alphabet, rates


#: what `compute` reports progress on, in order (link_rates announces the last four)
STAGES = ("channel response", "release-slot capacity", "input law", "trellis rate", "bounds")


def rate_record(scenario, response, rates) -> dict:
    record = {"scenario": scenario.name, "model": response.model}
    record.update(rates.to_dict())
    record["hits"] = np.asarray(response.hits).tolist()
    record["tail"] = np.asarray(response.tail).tolist()
    record["response_notes"] = list(response.notes)
    record["caution"] = SAFETY
    return record


def format_rates(scenario, response, rates) -> str:
    """The rate table: one row per figure, named by what it is, with its standard error (simulated figures) or
    certified gap (Blahut-Arimoto) in its own column, and bits/s and bits/molecule with their uncertainty."""
    d = rates.to_dict()
    ts = rates.symbol_interval
    m = rates.mean_molecules
    cap = rates.isi_free
    lines = [
        f"{scenario.name}: {d['scheme']} scheme, {rates.alphabet.size} symbols, slot {ts * 1e3:g} ms, "
        f"{response.model} response with {response.memory} lags",
        f"budget {fmt(scenario.signalling.budget) if scenario.signalling.budget else 'none'} molecules/symbol; "
        f"mean used {fmt(m)}",
        "",
        f"  {'figure':<46}{'bits/symbol':>12}{'std err':>10}{'cert. gap':>10}{'bits/s':>10}{'+/-':>9}"
        f"{'bits/molecule':>14}{'+/-':>9}",
    ]

    def row(name, value, err, gap, molecules):
        per_mol = value / molecules if molecules > 0 else float("nan")
        spread = err if err else gap
        mol_err = spread / molecules if molecules > 0 and spread else None
        per_s_err = fmt(spread / ts, 2) if spread else "-"
        lines.append(f"  {name:<46}{fmt(value):>12}{fmt(err, 2) if err else '-':>10}"
                     f"{fmt(gap, 2) if gap else '-':>10}{fmt(value / ts):>10}{per_s_err:>9}"
                     f"{fmt(per_mol):>14}{fmt(mol_err, 2) if mol_err else '-':>9}")

    row("single-slot capacity (later arrivals ignored)", cap.capacity, None, cap.gap, cap.mean_cost)
    head = rates.information_rate
    row("rate with ISI (reported)", head.rate, head.stderr, None, m)
    lines.append(f"    = {head.method}")
    lo_name, up_name = rates.lower_bound_method, rates.upper_bound_method
    row("lower end of the bracket", rates.lower_bound, d["lower_bounds"][lo_name]["stderr"], None, m)
    lines.append(f"    = {lo_name}")
    row("upper end of the bracket", rates.upper_bound, d["upper_bounds"][up_name]["stderr"], None, m)
    lines.append(f"    = {up_name}")
    if d["bracket_relative"] is not None:
        lines.append(f"    bracket width {100 * d['bracket_relative']:.1f}% of the lower end")
    lines.append("  every bound computed, bits/symbol (std err):")
    for kind, label in (("lower_bounds", "lower"), ("upper_bounds", "upper")):
        for name, v in d[kind].items():
            err = f"+/- {fmt(v['stderr'], 2)}" if v["stderr"] else "exact"
            lines.append(f"    {label}  {fmt(v['rate']):>8} {err:<13} {name}")
    lines.append("")
    lines.append("  single-slot capacity: Blahut-Arimoto on the release slot alone, later arrivals not counted; it is "
                 "not a ceiling (the rate with ISI exceeds it when most molecules arrive after the release slot)")
    uc = rates.unit_cost or {}
    if uc.get("bits_per_molecule") is not None:
        lines.append(f"  single-slot capacity per unit cost (budget -> 0): {fmt(uc['bits_per_molecule'])} "
                     f"bits/molecule (best symbol {uc['symbol']}; Verdu 1990)")
    lines.append(f"  single-slot capacity: {cap.message}")
    lines.append(f"  rate with ISI: {rates.information_rate.method}; {rates.information_rate.message}")
    law = np.asarray(rates.iid_input)
    used = [f"{lab} ({p:.3f})" for lab, p in zip(rates.alphabet.labels, law, strict=True) if p > 1e-4]
    lines.append(f"  input law ({rates.law_choice}): " + ", ".join(used))
    for note in tuple(response.notes) + tuple(rates.notes):
        lines.append(f"  note: {note}")
    return "\n".join(lines)


def markov_record(scenario, response, rates, *, n_symbols, seed) -> dict:
    """Optimised Markov input (Kavcic 2001; Vontobel et al. 2008) at the same budget, or why it was not run."""
    from capacity.errors import InputError
    from capacity.information.markov import markov_rate

    try:
        result, law = markov_rate(np.asarray(response.hits), scenario.background, rates.alphabet.symbols,
                                  interference=rates.interference, n_symbols=n_symbols,
                                  seed=scenario.channel.seed if seed is None else seed,
                                  budget=scenario.signalling.budget)
    except InputError as exc:  # asked for explicitly: a named error (exit 2), nothing printed as a result
        raise InputError("--markov", "requested", f"cannot apply here: {exc}",
                         "drop --markov, or shorten the memory (channel.memory) or use fewer symbols") from exc
    return {"rate": result.rate, "stderr": result.stderr, "method": result.method, "message": result.message,
            "bits_per_second": result.rate / rates.symbol_interval, "transition_law": law}


def check_markov(scenario) -> None:
    """Refuse ``--markov`` up front (before any long computation) when the source's trellis is too large."""
    from capacity.errors import InputError
    from capacity.information.markov import MAX_STATES
    from capacity.schemes.builders import build_alphabet

    memory = scenario.channel.memory
    if not isinstance(memory, int):
        return  # "auto": known only after the response; markov_record names the limit then
    n_sym = build_alphabet(scenario.signalling, len(scenario.emitters)).size
    if n_sym ** memory > MAX_STATES:
        raise InputError("--markov", "requested", f"a Markov source over {memory} lags of {n_sym} symbols has "
                         f"{n_sym}^{memory} = {n_sym ** memory} states > {MAX_STATES}",
                         "drop --markov, or shorten channel.memory, or use fewer symbols (levels)")


def run(args) -> int:
    scenario = apply_overrides(load(args.scenario, strict=args.strict), args)
    if args.markov:
        check_markov(scenario)
    effort = effort_of(args)
    response, _, rates = compute(scenario, model=args.model, seed=args.seed, effort=effort,
                                 progress=not (args.quiet or args.json), force=args.force)
    record = rate_record(scenario, response, rates)
    text = format_rates(scenario, response, rates)
    if args.markov:
        record["markov_input"] = markov_record(scenario, response, rates, n_symbols=effort.n_symbols,
                                               seed=args.seed)
        m = record["markov_input"]
        text += (f"\n  optimised Markov input: {fmt(m['rate'])} +/- {fmt(m['stderr'])} bits/symbol "
                 f"({fmt(m['bits_per_second'])} bits/s)")
    print(dump_json(record) if args.json else f"{text}\n{SAFETY}")
    return 0
