"""Every rate the tool reports for one scenario, response and alphabet.

``link_rates`` chains the information stage: the ISI-free capacity (Blahut–Arimoto under the molecule budget, with
its certified gap), the information rate with ISI for i.i.d. inputs (forward recursion, Arnold et al. 2006), and
the single-letter bounds I_sbs <= I_dfe <= I_iid <= I_mf, each per symbol, per second and per molecule.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from capacity.information.result import CapacityResult, RateResult
from capacity.schemes.alphabet import Alphabet

LN2 = float(np.log(2.0))


class LinkRates(NamedTuple):
    """Rates of one link (bits per symbol unless a name says otherwise).

    alphabet : the release vectors used.
    isi_free : Blahut–Arimoto result on the memoryless channel (lag 0 only plus background): the channel as if
        it were cleared between symbols, counting only in the release slot. When the symbol interval is shorter
        than the arrival peak, most molecules arrive in later slots and this can fall below the rate with ISI.
    iid_input : (S,) the input law used for the rates with ISI (default: ``isi_free.input_distribution``).
    information_rate : i.i.d. information rate with ISI (forward recursion, or its reduced-state lower bound).
    bounds : {"sbs", "dfe", "mf"} single-letter bounds for the same input law.
    mean_molecules : mean molecules per symbol under ``iid_input``.
    symbol_interval : seconds.
    interference : (R,) mean counts per slot added for the mass beyond the kept lags (zeros when dropped).
    notes : readable remarks.
    """

    alphabet: Alphabet
    isi_free: CapacityResult
    iid_input: np.ndarray
    information_rate: RateResult
    bounds: dict
    mean_molecules: float
    symbol_interval: float
    interference: np.ndarray
    notes: tuple = ()
    binomial: dict | None = None
    unit_cost: dict | None = None
    trellis: RateResult | None = None
    window: RateResult | None = None
    auxiliary_upper: tuple | None = None
    law_choice: str = "ISI-free optimum"

    def _lowers(self) -> dict:
        """Every lower bound (or exact estimate) on the i.i.d. rate: name -> (bits, stderr)."""
        out = {"ISI as noise (I_sbs)": self.bounds["sbs"], "decision feedback (I_dfe)": self.bounds["dfe"]}
        if self.window is not None:
            out[self.window.method] = self.window
        if self.trellis is not None:
            out[self.trellis.method] = self.trellis
        elif "lower bound" in self.information_rate.method:
            out[self.information_rate.method] = self.information_rate
        return {k: (float(v.rate), float(v.stderr)) for k, v in out.items()}

    def _uppers(self) -> dict:
        out = {"matched-filter genie (I_mf)": (float(self.bounds["mf"].rate), float(self.bounds["mf"].stderr))}
        if self.auxiliary_upper is not None:
            out["auxiliary-channel upper bound"] = tuple(float(v) for v in self.auxiliary_upper)
        return out

    @property
    def lower_bound(self) -> float:
        """Best lower bound on the i.i.d. rate: the largest of I_sbs, I_dfe, the windowed bound and the trellis
        estimate (exact or reduced-state)."""
        return float(max(v[0] for v in self._lowers().values()))

    @property
    def lower_bound_method(self) -> str:
        lowers = self._lowers()
        return max(lowers, key=lambda k: lowers[k][0])

    @property
    def upper_bound(self) -> float:
        """Tightest upper bound on the i.i.d. rate: the smaller of the matched-filter genie and the
        auxiliary-channel upper bound -E_p ln q(Y)/n - h(Y|X) (Arnold et al. 2006)."""
        return float(min(v[0] for v in self._uppers().values()))

    @property
    def upper_bound_method(self) -> str:
        uppers = self._uppers()
        return min(uppers, key=lambda k: uppers[k][0])

    def bracket_note(self) -> str | None:
        """A note when the lower bound exceeds the upper one (Monte Carlo noise), with the distance in SEs."""
        lo = self._lowers()[self.lower_bound_method]
        up = self._uppers()[self.upper_bound_method]
        if lo[0] <= up[0]:
            return None
        se = float(np.hypot(lo[1], up[1]))
        k = (lo[0] - up[0]) / se if se > 0 else float("inf")
        return (f"lower bound {lo[0]:.4g} ({self.lower_bound_method}) exceeds upper bound {up[0]:.4g} "
                f"({self.upper_bound_method}) by {lo[0] - up[0]:.2g} bits = {k:.1f} combined standard errors: "
                "Monte Carlo noise" + ("" if k < 3 else "; more than 3 SE, increase n_symbols/bound_samples"))

    def per_second(self, bits_per_symbol: float) -> float:
        return float(bits_per_symbol) / self.symbol_interval

    def per_molecule(self, bits_per_symbol: float, molecules: float | None = None) -> float:
        m = self.mean_molecules if molecules is None else molecules
        return float(bits_per_symbol) / m if m > 0 else float("nan")

    def to_dict(self) -> dict:
        """JSON-ready record (bits; seconds; molecules)."""
        cap = self.isi_free
        r = self.information_rate
        return {
            "units": {"rates": "bits/symbol", "bits_per_second": "bits/s", "bits_per_molecule": "bits/molecule",
                      "symbol_interval": "s", "molecules": "molecules per symbol", "interference": "counts per slot"},
            "alphabet": np.asarray(self.alphabet.symbols).tolist(),
            "symbol_labels": list(self.alphabet.labels),
            "scheme": self.alphabet.scheme,
            "single_slot_capacity": cap.capacity,
            "certified_gap": cap.gap,
            "input_distribution": np.asarray(cap.input_distribution).tolist(),
            "single_slot_mean_molecules": cap.mean_cost,
            "single_slot_converged": cap.converged,
            "single_slot_message": cap.message,
            "iid_input": np.asarray(self.iid_input).tolist(),
            "information_rate": r.rate,
            "stderr": r.stderr,
            "rate_method": r.method,
            "rate_message": r.message,
            "input_law_choice": self.law_choice,
            "lower_bound": self.lower_bound,
            "lower_bound_method": self.lower_bound_method,
            "upper_bound": self.upper_bound,
            "upper_bound_method": self.upper_bound_method,
            "bracket_relative": ((self.upper_bound - self.lower_bound) / self.lower_bound
                                 if self.lower_bound > 0 else None),
            "lower_bounds": {k: {"rate": v[0], "stderr": v[1]} for k, v in self._lowers().items()},
            "upper_bounds": {k: {"rate": v[0], "stderr": v[1]} for k, v in self._uppers().items()},
            "bounds": {k: {"rate": v.rate, "stderr": v.stderr, "method": v.method} for k, v in self.bounds.items()},
            "mean_molecules": self.mean_molecules,
            "symbol_interval": self.symbol_interval,
            "bits_per_symbol": {
                "single_slot_capacity": cap.capacity,
                "information_rate": r.rate,
                "lower_bound": self.lower_bound,
                "upper_bound": self.upper_bound,
            },
            "bits_per_second": {
                "single_slot_capacity": cap.capacity / self.symbol_interval,
                "information_rate": self.per_second(r.rate),
                "lower_bound": self.per_second(self.lower_bound),
                "upper_bound": self.per_second(self.upper_bound),
            },
            "bits_per_molecule": {
                "single_slot_capacity": self.per_molecule(cap.capacity, cap.mean_cost),
                "information_rate": self.per_molecule(r.rate),
                "lower_bound": self.per_molecule(self.lower_bound),
                "upper_bound": self.per_molecule(self.upper_bound),
            },
            "interference": np.asarray(self.interference).tolist(),
            "binomial_counting": self.binomial,
            "capacity_per_molecule": self.unit_cost,
            "notes": list(self.notes),
        }


def residual_interference(tail: np.ndarray, symbols: np.ndarray, input_law: np.ndarray) -> np.ndarray:
    """Mean extra counts per slot from the mass beyond the kept lags: sum_i E[x_i] tail[i, j], shape (R,).

    Each earlier symbol contributes its release times the hit probability of its own late slot; summed over all
    lags beyond L this is the whole tail mass times the mean release (stationary i.i.d. inputs).
    """
    mean_release = np.asarray(input_law, dtype=float) @ np.asarray(symbols, dtype=float)  # (E,)
    return mean_release @ np.asarray(tail, dtype=float)


def link_rates(
    scenario,
    response,
    alphabet: Alphabet,
    *,
    budget: float | None = None,
    iid_input: np.ndarray | None = None,
    n_symbols: int = 20_000,
    n_runs: int = 8,
    bound_samples: int = 20_000,
    seed: int | None = None,
    tol: float = 1e-9,
    max_states: int = 4096,
    window_samples: int = 4096,
    optimise_law: bool = True,
    candidate_laws: dict | None = None,
    stage=None,
    effort=None,
) -> LinkRates:
    """All rates of a link.

    Parameters
    ----------
    scenario : Scenario (background, symbol interval, residual handling, seed).
    response : ChannelResponse (hits (E,R,L+1), tail (E,R)).
    alphabet : Alphabet (symbols (S,E) molecules).
    budget : mean molecules per symbol; default ``scenario.signalling.budget`` (None = unconstrained).
    iid_input : (S,) input law for the rates with ISI; default the ISI-free optimum under the same budget.
    n_symbols, n_runs : forward-recursion length and independent runs (standard error from their spread).
    bound_samples : Monte Carlo samples for bounds that cannot be enumerated.
    seed : default ``scenario.channel.seed``.
    window_samples : Monte Carlo pasts of the windowed decision-feedback bound.
    optimise_law : when no ``iid_input`` is given and there is memory, also try the i.i.d. law optimised for the
        rate with ISI (:func:`capacity.information.iid_law.optimise_iid_law`) and keep the better one.
    candidate_laws : name -> (S,) further laws to try (those over the budget are skipped).
    stage : optional callable, called with a short name as each long stage starts (progress display).
    effort : an :class:`capacity.effort.Effort` or its name (``"quick"``, ``"full"``); when given it replaces
        ``n_symbols``, ``n_runs``, ``max_states``, ``window_samples`` and ``bound_samples``, sizes the reduced
        trellis from its time budget and adds batches of runs until the trellis and windowed estimates reach
        its relative standard error (:mod:`capacity.effort`).

    The reported ``information_rate`` is the forward-recursion estimate when the trellis keeps every lag, else
    the larger of its reduced-state lower bound and the windowed bound; ``lower_bound``/``upper_bound`` are the
    tightest of all bounds computed (each named in ``to_dict``). Taking the larger of several Monte Carlo
    estimates favours the luckier one by at most about one standard error; each keeps its own SE in the record.
    """
    from capacity.channel.transition import poisson_transition, symbol_means
    from capacity.information.blahut_arimoto import blahut_arimoto
    from capacity.information.bounds import isi_bounds
    from capacity.information.trellis import rate_result, trellis_rates
    from capacity.information.window import window_bound

    if effort is not None:
        from capacity.effort import effort as _effort

        effort = _effort(effort)
        n_symbols, n_runs, max_states = effort.n_symbols, effort.n_runs, effort.max_states
        window_samples, bound_samples = effort.window_samples, effort.bound_samples
    budget = scenario.signalling.budget if budget is None else budget
    seed = scenario.channel.seed if seed is None else seed
    hits = np.asarray(response.hits, dtype=float)
    background = scenario.background
    symbols = np.asarray(alphabet.symbols, dtype=float)
    cost = alphabet.cost
    notes = []

    stage = stage or (lambda name: None)
    stage("release-slot capacity")
    means0 = np.asarray(symbol_means(hits, background, symbols))
    transition = poisson_transition(means0)
    isi_free = blahut_arimoto(transition, cost=cost if budget is not None else None, budget=budget, tol=tol)
    truncated = float(np.max(np.asarray(transition.truncated_mass)))
    notes.append(f"ISI-free output grid: {np.shape(transition.matrix)[1]} outputs, largest truncated mass "
                 f"{truncated:.1e}")
    strongest = np.argmax(hits.sum(axis=-1), axis=0)  # per receiver, the emitter it hears best
    peak_slot = np.argmax(hits[strongest, np.arange(hits.shape[1])], axis=-1)
    if np.any(peak_slot > 0):
        notes.append("a receiver's strongest signal peaks after the release slot: the ISI-free capacity "
                     "(release slot only) understates what the link carries; compare the rate with ISI instead")

    unit_cost = _unit_cost(transition, cost, alphabet)
    binomial = None
    if scenario.channel.counting == "binomial":
        binomial = _binomial_comparison(transition, symbols, hits[:, :, 0], background, cost, budget, tol)
        notes.append(f"exact multinomial counting (fixed release counts, memoryless): ISI-free capacity "
                     f"{binomial['single_slot_capacity']:.6g} bits vs Poisson {isi_free.capacity:.6g}; largest "
                     f"total-variation distance between the laws {binomial['max_tv']:.2e}; the rates with ISI use "
                     "the Poisson law")
    law = np.asarray(isi_free.input_distribution if iid_input is None else iid_input, dtype=float)
    law = law / law.sum()
    law_choice = "given" if iid_input is not None else "ISI-free optimum (Blahut-Arimoto, release slot only)"
    tail = np.asarray(response.tail, dtype=float)
    use_tail = scenario.channel.residual == "interference"
    L = hits.shape[2] - 1
    stage("input law")
    search = optimise_law and iid_input is None
    if L > 0 and (search or candidate_laws):
        law, law_choice, law_note = _choose_law(hits, background, symbols, cost, budget, law, law_choice,
                                                tail if use_tail else None, candidate_laws, search, seed, effort)
        notes.append(law_note)
    if use_tail:
        interference = residual_interference(tail, symbols, law)
        notes.append("mass beyond the kept lags added as mean interference "
                     f"({', '.join(f'{v:.3g}' for v in interference)} counts per slot)")
    else:
        interference = np.zeros(hits.shape[1])
        notes.append("mass beyond the kept lags dropped (channel.residual = 'drop')")

    stage("trellis rate")
    if effort is not None and effort.trellis_seconds is not None:
        from capacity.effort import states_for_budget

        max_states = states_for_budget(len(law), L, n_symbols * n_runs, effort.trellis_seconds, max_states)

    def trellis_batch(batch):
        from capacity.effort import batch_seed

        return trellis_rates(hits, background, symbols, law, interference=interference, n_symbols=n_symbols,
                             n_runs=n_runs, seed=batch_seed(seed, batch), max_states=max_states)

    tr = _refined_trellis(trellis_batch, n_symbols, seed, effort)
    trellis = rate_result(tr, n_symbols, seed)
    k = tr["upper"].size
    aux_upper = (float(tr["upper"].mean()), float(tr["upper"].std(ddof=1) / np.sqrt(k)))
    stage("bounds")

    def window_batch(batch):
        from capacity.effort import batch_seed

        return window_bound(hits, background, symbols, law, interference=interference, n_samples=window_samples,
                            seed=batch_seed(seed + 3, batch))

    window = _refined(window_batch, effort) if L > 0 else None
    bounds = isi_bounds(hits, background, symbols, law, interference=interference, n_samples=bound_samples,
                        seed=seed + 1)
    headline = trellis
    if not tr["exact"] and window is not None and window.rate > trellis.rate:
        headline = window
        notes.append(f"the windowed decision-feedback bound ({window.rate:.4g} bits) beats the reduced-state "
                     f"trellis bound ({trellis.rate:.4g}): it is the rate reported")
    mean_molecules = float(law @ cost)
    out = LinkRates(alphabet, isi_free, law, headline, bounds, mean_molecules, scenario.channel.symbol_interval,
                    np.asarray(interference), tuple(notes), binomial, unit_cost, trellis, window, aux_upper,
                    law_choice)
    note = out.bracket_note()
    return out._replace(notes=out.notes + (note,)) if note else out


def _refined(batch, effort):
    """``batch(0)``, then further independent batches pooled until the relative standard error reaches
    ``effort.precision`` (or ``effort.max_rounds`` batches); one batch without an effort."""
    from capacity.effort import pool, relative_se

    results = [batch(0)]
    while (effort is not None and effort.precision is not None and len(results) < effort.max_rounds
           and relative_se(pool(results)) > effort.precision):
        results.append(batch(len(results)))
    return pool(results)


def _refined_trellis(batch, n_symbols, seed, effort):
    """Per-run trellis estimates, with batches of runs added under the stopping rule of :func:`_refined`."""
    from capacity.effort import relative_se
    from capacity.information.trellis import rate_result

    tr = batch(0)
    rounds = 1
    while (effort is not None and effort.precision is not None and rounds < effort.max_rounds
           and relative_se(rate_result(tr, n_symbols, seed)) > effort.precision):
        more = batch(rounds)
        tr = dict(tr, lower=np.concatenate([tr["lower"], more["lower"]]),
                  upper=np.concatenate([tr["upper"], more["upper"]]))
        rounds += 1
    return tr


def _choose_law(hits, background, symbols, cost, budget, law, law_choice, tail, candidate_laws, optimise_law,
                seed, effort=None):
    """The i.i.d. law with the largest windowed bound (common random numbers) among the given one, the law
    optimised for the rate with ISI (mirror ascent, :mod:`capacity.information.iid_law`) and any candidates
    (laws found at smaller budgets stay feasible at larger ones)."""
    from capacity.information.iid_law import optimise_iid_law
    from capacity.information.window import window_bound

    base = np.broadcast_to(np.asarray(background, dtype=float), (hits.shape[1],))
    candidates = [(law_choice, law)]
    if optimise_law:
        extra = {} if effort is None else {"n_samples": effort.law_samples, "iterations": effort.law_iterations}
        opt = optimise_iid_law(hits, base, symbols, cost, budget, law, tail=tail, seed=seed + 2, **extra)
        candidates.append(("optimised for the rate with ISI (windowed bound, mirror ascent)", opt.law))
    for name, cand in (candidate_laws or {}).items():
        cand = np.asarray(cand, dtype=float)
        if budget is None or cand @ cost <= budget + 1e-9:
            candidates.append((name, cand / cand.sum()))
    scores = []
    for _name, cand in candidates:
        interference = residual_interference(tail, symbols, cand) if tail is not None else None
        w = window_bound(hits, base, symbols, cand, interference=interference,
                         n_samples=2048 if effort is None else effort.law_samples, seed=seed + 4)
        scores.append(w.rate)
    best = int(np.argmax(scores))
    name, chosen = candidates[best]
    listing = ", ".join(f"{n}: {v:.4g}" for (n, _), v in zip(candidates, scores, strict=True))
    return chosen, name, f"input law chosen by the windowed bound on common random numbers ({listing} bits)"


def _unit_cost(transition, cost, alphabet) -> dict:
    """ISI-free capacity per unit cost (Verdú 1990), bits per molecule, or the reason it is not defined."""
    from capacity.errors import InputError
    from capacity.information.unit_cost import capacity_per_unit_cost

    try:
        value, best = capacity_per_unit_cost(transition, cost)
    except InputError as exc:
        return {"bits_per_molecule": None, "reason": str(exc)}
    return {"bits_per_molecule": value, "symbol": alphabet.labels[best],
            "meaning": "sup over symbols of D(W_x || W_silent) / molecules: the ISI-free limit of bits per "
                       "molecule as the budget goes to zero (Verdu 1990)"}


def _binomial_comparison(poisson, symbols, probs, background, cost, budget, tol) -> dict:
    """ISI-free capacity under the exact multinomial law for fixed release counts, and its distance to Poisson."""
    from capacity.channel.transition import binomial_transition, law_distance
    from capacity.information.blahut_arimoto import blahut_arimoto

    exact = binomial_transition(np.rint(symbols).astype(int), probs, background)
    result = blahut_arimoto(exact, cost=cost if budget is not None else None, budget=budget, tol=tol)
    distance = law_distance(poisson, exact)
    return {
        "single_slot_capacity": result.capacity,
        "gap": result.gap,
        "input_distribution": np.asarray(result.input_distribution).tolist(),
        "max_tv": distance["max_tv"],
        "tv_per_symbol": np.asarray(distance["tv_per_symbol"]).tolist(),
    }
