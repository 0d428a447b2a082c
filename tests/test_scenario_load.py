"""Scenario files and dictionaries -> Scenario. Unit conversions are checked against the SI definitions of the
units (common practice); every error kind is checked for the field it names and the fix it gives."""

import copy
import re
import warnings
from pathlib import Path

import pytest

from capacity.errors import InputError
from capacity.scenario.load import ScenarioKeyWarning, load_scenario, scenario_from_dict
from capacity.scenario.types import Scenario

DATA = Path(__file__).parent / "data" / "scenarios"


def base() -> dict:
    """A valid scenario of our own invention, as a fresh dictionary."""
    return {
        "name": "two cells",
        "medium": {"diffusion": "79.4 um^2/s"},
        "emitter": [
            {"name": "A", "position": ["0 um", "0 um", "0 um"]},
            {"name": "B", "position": [0.0, 3e-5, 0.0]},
        ],
        "receiver": [
            {"name": "R1", "centre": ["15 um", 0, 0], "radius": "5 um"},
            {"name": "R2", "centre": ["-15 um", 0, 0], "radius": "4 um"},
        ],
        "channel": {"symbol_interval": "100 ms"},
    }


# -- good files -------------------------------------------------------------------------------------------------
def test_file_with_units_round_trip():
    s = load_scenario(DATA / "pond_two_cells.toml")
    assert isinstance(s, Scenario)
    assert s.name == "pond: one source, two cells"
    # SI definitions of the units (common practice): 1 um = 1e-6 m, 1 ms = 1e-3 s
    assert s.medium.diffusion == pytest.approx(7.94e-11, rel=0, abs=1e-24)
    assert s.medium.degradation == 0.5
    assert s.emitters[0].position == pytest.approx((0.0, 1e-5, 0.0), rel=0, abs=1e-20)
    assert s.receivers[0].centre == pytest.approx((1.5e-5, 1e-5, 0.0), rel=0, abs=1e-20)
    assert s.receivers[1].radius == pytest.approx(5e-6, rel=0, abs=1e-20)  # written "5µm" (no space, micro sign)
    c = s.channel
    assert c.symbol_interval == pytest.approx(0.2, rel=0, abs=1e-16)
    assert c.particle_step == pytest.approx(5e-4, rel=0, abs=1e-18)
    assert (c.memory, c.memory_tolerance, c.counting, c.residual, c.response) == (
        12,
        0.005,
        "poisson",
        "drop",
        "lone",
    )
    assert c.background == (0.5, 2.0)
    assert c.particle_count == 40000 and isinstance(c.particle_count, int)
    assert c.seed == 7
    g = s.signalling
    assert (g.scheme, g.levels, g.peak, g.budget, g.emitter) == ("amplitude", 4, 3000.0, 1200.0, 0)


def test_file_in_si_numbers_and_defaults():
    s = load_scenario(DATA / "gut_pair_si.toml")
    assert s.medium.degradation == 0.0  # default
    assert [e.name for e in s.emitters] == ["left", "right"]
    assert s.emitter_positions.shape == (2, 3)
    assert s.receivers[1].kind == "passive" and s.receivers[1].sample_offset == 0.25
    assert s.receivers[0].kind == "absorbing" and s.receivers[0].sample_offset is None
    assert s.channel.background == (1.5, 1.5)  # one number spread over both receivers
    assert s.channel.memory == "auto" and s.channel.response == "shadowed" and s.channel.particle_count == 20000
    assert s.signalling.scheme == "spatial" and s.signalling.silent is False


def test_minimal_file_defaults():
    s = load_scenario(str(DATA / "minimal.toml"))
    assert s.signalling.scheme == "amplitude" and s.signalling.levels == 2
    assert s.channel.background == (0.0,)
    assert s.channel.particle_step is None and s.channel.seed == 0


def test_dict_and_file_agree(tmp_path):
    text = (DATA / "minimal.toml").read_text()
    path = tmp_path / "copy.toml"
    path.write_text(text)
    import tomllib

    assert load_scenario(path) == scenario_from_dict(tomllib.loads(text))


# -- renamed keys: channel.particles -> particle_count, channel.time_step -> particle_step ------------------------
def test_old_key_names_load_to_the_same_scenario_with_a_note():
    # reference: the same file written with the new names (pond_two_cells.toml)
    with pytest.warns(ScenarioKeyWarning) as caught:
        old = load_scenario(DATA / "pond_two_cells_old_keys.toml")
    new = load_scenario(DATA / "pond_two_cells.toml")
    assert old == new
    assert old.channel.particle_count == 40000 and old.channel.particle_step == pytest.approx(5e-4, rel=0, abs=1e-18)
    notes = [str(w.message) for w in caught if issubclass(w.category, ScenarioKeyWarning)]
    assert len(notes) == 2
    assert re.search(r"channel\.particles in .*pond_two_cells_old_keys\.toml is deprecated: rename it to "
                     r"channel\.particle_count", notes[0])
    assert re.search(r"channel\.time_step in .* is deprecated: rename it to channel\.particle_step", notes[1])


def test_new_key_names_give_no_note():
    with warnings.catch_warnings():
        warnings.simplefilter("error", ScenarioKeyWarning)
        load_scenario(DATA / "pond_two_cells.toml")
        load_scenario("demo")


def test_old_key_in_a_dict_reads_the_same_and_leaves_the_dict_alone():
    d = base()
    d["channel"].update({"particles": 500, "time_step": "2 ms"})
    before = copy.deepcopy(d)
    with pytest.warns(ScenarioKeyWarning) as caught:
        old = scenario_from_dict(d)
    assert [str(w.message).split(" is deprecated")[0] for w in caught] == ["channel.particles in <dict>",
                                                                            "channel.time_step in <dict>"]
    assert d == before
    new = base()
    new["channel"].update({"particle_count": 500, "particle_step": "2 ms"})
    assert old == scenario_from_dict(new) and old.channel.particle_count == 500


@pytest.mark.parametrize("old, new", [("particles", "particle_count"), ("time_step", "particle_step")])
def test_old_and_new_name_together_is_an_error(old, new):
    d = base()
    d["channel"].update({old: 100, new: 100})
    with pytest.raises(InputError, match=rf"channel\.{old} = 100: is the old name of channel\.{new}, which is also "
                       rf"given.*Fix: keep only channel\.{new}"):
        scenario_from_dict(d)


def test_signalling_emitter_by_name_and_index():
    d = base()
    d["signalling"] = {"scheme": "amplitude", "emitter": "B"}
    assert scenario_from_dict(d).signalling.emitter == 1
    d["signalling"]["emitter"] = 1
    assert scenario_from_dict(d).signalling.emitter == 1


def test_amplitudes_override_levels_and_peak():
    # as in Signalling: explicit amplitudes override levels and peak, which are kept as written
    d = base()
    d["signalling"] = {"scheme": "hybrid", "amplitudes": [0, 5000], "levels": 3, "peak": 1000, "emitter": "B"}
    g = scenario_from_dict(d).signalling
    assert (g.amplitudes, g.levels, g.peak, g.emitter) == ((0.0, 5000.0), 3, 1000.0, 1)


def test_amplitudes_set_levels_and_peak():
    d = base()
    d["signalling"] = {"amplitudes": [0, 400, "1000 molecules"]}
    g = scenario_from_dict(d).signalling
    assert g.amplitudes == (0.0, 400.0, 1000.0) and g.levels == 3 and g.peak == 1000.0


# -- file-level errors ------------------------------------------------------------------------------------------
def test_missing_file():
    with pytest.raises(InputError, match=r"scenario file.*cannot be read.*Fix: check the path"):
        load_scenario(DATA / "no_such_file.toml")


def test_not_toml_gives_line_and_column():
    with pytest.raises(InputError, match=r"not valid TOML.*line 4, column \d+.*Fix: fix the syntax"):
        load_scenario(DATA / "bad_syntax.toml")


def test_not_utf8(tmp_path):
    p = tmp_path / "latin.toml"
    p.write_bytes(b'name = "caf\xe9"\n')
    with pytest.raises(InputError, match="not UTF-8"):
        load_scenario(p)


def test_unknown_key_in_file_suggests_nearest():
    with pytest.raises(InputError, match=r'unknown key "radious" in receiver\[0\]\. Fix: did you mean "radius"\?'):
        load_scenario(DATA / "bad_unknown_key.toml")


def test_emitter_inside_file():
    with pytest.raises(InputError, match=r'emitter\[0\]\.position.*3 um inside receiver\[0\] "cell".*Fix: move'):
        load_scenario(DATA / "bad_emitter_inside.toml")


# -- dictionary errors ------------------------------------------------------------------------------------------
def _set(path, value):
    """A mutation setting data[path...] = value (value DELETE removes the key)."""

    def apply(d):
        target = d
        for key in path[:-1]:
            target = target[key]
        if value is DELETE:
            del target[path[-1]]
        else:
            target[path[-1]] = value

    return apply


DELETE = object()

CASES = [
    # unknown keys, with the nearest valid key suggested
    (_set(["medium", "difusion"], 1e-10), r"medium\.difusion.*unknown key.*did you mean \"diffusion\""),
    (_set(["chanel"], {}), r"chanel.*unknown key \"chanel\".*did you mean \"channel\""),
    (_set(["channel", "symbol_intervall"], 0.1), r"did you mean \"symbol_interval\""),
    (_set(["signalling"], {"levls": 3}), r"signalling\.levls.*did you mean \"levels\""),
    (_set(["emitter", 0, "pos"], [0, 0, 0]), r"emitter\[0\]\.pos.*Fix: valid keys: \"name\", \"position\""),
    # missing required keys
    (_set(["name"], DELETE), r"name.*missing.*Fix: add a line such as name ="),
    (_set(["medium"], DELETE), r"the \[medium\] table is missing.*add a \[medium\] table"),
    (_set(["medium", "diffusion"], DELETE), r"medium\.diffusion.*missing.*Fix: give a diffusion coefficient"),
    (_set(["channel", "symbol_interval"], DELETE), r"channel\.symbol_interval.*missing.*Fix: give a slot length"),
    (_set(["emitter"], DELETE), r"no \[\[emitter\]\] table.*add at least one"),
    (_set(["receiver"], []), r"receiver.*non-empty list of tables"),
    (_set(["receiver", 1, "radius"], DELETE), r"receiver\[1\]\.radius.*missing.*Fix: give a radius"),
    (_set(["emitter", 1, "name"], DELETE), r"emitter\[1\]\.name.*missing"),
    # wrong types / shapes
    (_set(["name"], 3), r"name = 3: must be a string"),
    (_set(["medium"], 5), r"medium = 5: must be a table"),
    (_set(["emitter"], {"name": "A", "position": [0, 0, 0]}), r"single table.*Fix: write \[\[emitter\]\]"),
    (
        _set(["emitter", 0, "position"], [0, 0]),
        r"emitter\[0\]\.position.*list of 3 coordinates.*Fix: give \[x, y, z\]",
    ),
    (_set(["emitter", 0, "position"], "0 0 0"), r"emitter\[0\]\.position.*list of 3"),
    (_set(["receiver", 0, "name"], 7), r"receiver\[0\]\.name = 7: must be a string"),
    (_set(["signalling"], {"silent": "yes"}), r"signalling\.silent.*true or false"),
    (_set(["signalling"], {"levels": 2.5}), r"signalling\.levels.*whole number"),
    (_set(["signalling"], {"levels": True}), r"signalling\.levels.*integer"),
    (_set(["channel", "particle_count"], 1.5e3 + 0.5), r"channel\.particle_count = 1500\.5.*whole number"),
    # a deprecated key is named as written, with the rename in the fix
    (_set(["channel", "particles"], 1.5e3 + 0.5),
     r"channel\.particles = 1500\.5.*whole number.*rename channel\.particles to channel\.particle_count"),
    (_set(["channel", "time_step"], "1 s"),
     r"channel\.time_step = .*longer than the symbol_interval.*rename channel\.time_step to channel\.particle_step"),
    (_set(["channel", "seed"], -1), r"channel\.seed.*non-negative integer"),
    (_set(["channel", "memory_tolerance"], "small"), r"channel\.memory_tolerance.*must be a number"),
    (_set(["signalling"], {"amplitudes": 5}), r"signalling\.amplitudes.*list of molecule counts"),
    # malformed units, wrong dimensions, NaN/inf
    (_set(["receiver", 1, "radius"], "5 s"), r'receiver\[1\]\.radius.*not a length.*give a length such as "5 um"'),
    (_set(["receiver", 0, "centre"], ["15 um", "0 ms", 0]), r"receiver\[0\]\.centre\[1\].*not a length"),
    (_set(["medium", "diffusion"], "79.4 um/s"), r"medium\.diffusion.*not a diffusion coefficient"),
    (_set(["medium", "degradation"], "2 um"), r"medium\.degradation.*not a rate"),
    (_set(["channel", "symbol_interval"], "100 mss"), r"channel\.symbol_interval.*cannot be read"),
    (_set(["channel", "symbol_interval"], float("nan")), r"channel\.symbol_interval.*finite"),
    (_set(["receiver", 0, "radius"], float("inf")), r"receiver\[0\]\.radius.*finite"),
    # value ranges (checked by the validator, same field names)
    (_set(["medium", "diffusion"], 0.0), r"medium\.diffusion = 0\.0: must be positive"),
    (_set(["medium", "diffusion"], "-1 um^2/s"), r"medium\.diffusion.*must be positive"),
    (_set(["medium", "degradation"], -0.1), r"medium\.degradation.*must not be negative.*Fix: give a rate >= 0"),
    (_set(["receiver", 0, "radius"], "0 um"), r"receiver\[0\]\.radius.*must be positive.*give a positive radius"),
    (_set(["channel", "symbol_interval"], -0.1), r"channel\.symbol_interval.*must be positive"),
    (_set(["channel", "particle_count"], 0), r"channel\.particle_count.*positive integer"),
    (_set(["channel", "background"], -1.0), r"channel\.background\[0\].*must not be negative"),
    (_set(["channel", "background"], [1.0, -0.5]), r"channel\.background\[1\].*must not be negative"),
    (
        _set(["channel", "background"], [1.0, 2.0, 3.0]),
        r"channel\.background.*3 entries but there are 2 receivers",
    ),
    (_set(["channel", "memory"], -1), r"channel\.memory.*non-negative integer.*or \"auto\""),
    (_set(["channel", "memory"], 2.5), r"channel\.memory.*whole number"),
    (_set(["channel", "memory"], "forever"), r"channel\.memory.*neither an integer nor \"auto\""),
    (_set(["channel", "memory"], 2001), r"channel\.memory = 2001: is above the cap of 2000 lags"),
    (_set(["channel", "memory_tolerance"], 1.5), r"channel\.memory_tolerance.*between 0 and 1"),
    (_set(["channel", "particle_step"], "1 s"), r"channel\.particle_step.*longer than the symbol_interval"),
    (_set(["channel", "particle_step"], "0 s"), r"channel\.particle_step.*must be positive"),
    # duplicate names
    (_set(["emitter", 1, "name"], "A"), r"emitter\[1\]\.name = 'A': is already used by emitter\[0\]"),
    (_set(["receiver", 1, "name"], "R1"), r"receiver\[1\]\.name.*already used by receiver\[0\]"),
    # enums with the nearest option suggested
    (
        _set(["receiver", 0, "kind"], "absorbent"),
        r"receiver\[0\]\.kind.*not a known option.*did you mean \"absorbing\"",
    ),
    (_set(["channel", "counting"], "Poisson"), r"channel\.counting.*did you mean \"poisson\""),
    (_set(["channel", "residual"], "dropped"), r"channel\.residual.*did you mean \"drop\""),
    (_set(["channel", "response"], "particle"), r"channel\.response.*did you mean \"particles\""),
    (_set(["signalling"], {"scheme": "spacial"}), r"signalling\.scheme.*did you mean \"spatial\""),
    # signalling
    (_set(["signalling"], {"levels": 1}), r"signalling\.levels = 1: must be an integer >= 2.*Fix: give 2"),
    (_set(["signalling"], {"budget": 0}), r"signalling\.budget.*must be positive"),
    (
        _set(["signalling"], {"peak": 100, "budget": 250}),
        r"signalling\.budget = 250\.0: is larger than peak x number of emitters = 200.*no alphabet can meet it",
    ),
    (_set(["signalling"], {"emitter": "C"}), r"signalling\.emitter = 'C': is not the name of an emitter"),
    (_set(["signalling"], {"emitter": "b"}), r"signalling\.emitter.*did you mean \"B\""),
    (_set(["signalling"], {"emitter": 2}), r"signalling\.emitter = 2: is not an emitter index \(0 to 1\)"),
    (_set(["signalling"], {"amplitudes": [0, 500, 500]}), r"signalling\.amplitudes.*repeats a level"),
    (_set(["signalling"], {"amplitudes": [0, -5]}), r"signalling\.amplitudes\[1\].*must not be negative"),
    (
        _set(["signalling"], {"amplitudes": [0, 100], "peak": 1000, "budget": 300}),
        r"budget.*largest amplitude x number of emitters = 200",
    ),
    # sample_offset
    (_set(["receiver", 0, "sample_offset"], "10 ms"), r"receiver\[0\]\.sample_offset.*only used by passive"),
    # geometry
    (_set(["emitter", 0, "position"], ["12 um", 0, 0]), r"emitter\[0\]\.position.*inside receiver\[0\] \"R1\""),
    (
        _set(["receiver", 1, "centre"], ["7 um", 0, 0]),
        r"receiver\[1\]\.centre.*\"R2\" overlaps receiver\[0\] \"R1\" by 1 um"
        r".*Fix: move the centres more than 9 um apart",
    ),
    (
        _set(["receiver", 1, "centre"], ["6 um", 0, 0]),
        r"receiver\[1\]\.centre.*\"R2\" touches receiver\[0\] \"R1\"",
    ),
    (
        _set(["emitter", 1, "position"], ["15 um", "5 um", 0]),
        r"emitter\[1\]\.position.*on the surface of receiver\[0\]",
    ),
]


@pytest.mark.parametrize("mutate, pattern", CASES, ids=[re.sub(r"\W+", "_", c[1])[:40] for c in CASES])
def test_error_names_field_and_fix(mutate, pattern):
    d = copy.deepcopy(base())
    mutate(d)
    with pytest.raises(InputError, match=pattern) as info:
        scenario_from_dict(d)
    assert info.value.fix, "every error carries a fix"


@pytest.mark.parametrize(
    "offset, ok", [("0 ms", False), ("-5 ms", False), ("100 ms", True), ("101 ms", False), ("1 ms", True)]
)
def test_passive_sample_offset_range(offset, ok):
    d = base()
    d["receiver"][1].update(kind="passive", sample_offset=offset)
    if ok:
        assert scenario_from_dict(d).receivers[1].sample_offset == pytest.approx(float(offset.split()[0]) * 1e-3)
    else:
        with pytest.raises(InputError, match=r"receiver\[1\]\.sample_offset.*\(0, symbol_interval\].*Fix: give a"):
            scenario_from_dict(d)


def test_memory_at_cap_is_allowed():
    d = base()
    d["channel"]["memory"] = 2000
    assert scenario_from_dict(d).channel.memory == 2000


def test_not_a_dict():
    with pytest.raises(InputError, match="must be a table of scenario keys"):
        scenario_from_dict([1, 2])
