"""Campaign files, the sampler and the checks before anything runs (pure Python, no JVM).

Sources: the sampler's distributions are checked with the one-sample Kolmogorov-Smirnov test
(Massey, "The Kolmogorov-Smirnov test for goodness of fit", JASA 46(253), 1951; scipy.stats.kstest)
against scipy.stats' own distributions, and the choice distribution with Pearson's chi-square test
(Pearson, Philosophical Magazine 50, 1900; scipy.stats.chisquare). Everything else checks covey's
own input contract (common practice, no source).
"""

from __future__ import annotations

import textwrap
import tomllib

import numpy as np
import pytest
from scipy import stats

from sim.campaign.plan import plan_campaign, source_state
from sim.campaign.sampler import draws, run_seed
from sim.campaign.spec import SOURCES, load_campaign, parse_campaign
from sim.campaign.tomltext import dumps
from sim.cli.main import main
from sim.errors import ScenarioError
from sim.scenario.overrides import apply_override
from sim.scenario.reader import parse_scenario


@pytest.fixture
def demo(repo_root):
    return repo_root / "scenarios" / "demo_formation.toml"


def head(demo, runs=4, extra=""):
    return textwrap.dedent(f"""
        [campaign]
        name = "t"
        scenario = "{demo}"
        runs = {runs}
        master_seed = 5
        [campaign.set]
        "run.duration_days" = 0.2
        """) + textwrap.dedent(extra)


# ------------------------------------------------------------------------------------------
# Key paths (shared with covey run --set)
# ------------------------------------------------------------------------------------------


def test_override_replaces_one_array_element(demo):
    raw = tomllib.loads(demo.read_text())
    before = list(raw["deputies"][0]["roe_m"])
    apply_override(raw, "deputies[0].roe_m[1]", 2500.0, "x")
    assert raw["deputies"][0]["roe_m"] == before[:1] + [2500.0] + before[2:]
    cfg = parse_scenario(demo.read_text(), str(demo), overrides={"deputies[1].roe_m[3]": -90.0})
    assert cfg.deputies[1].roe_m[3] == -90.0 and cfg.deputies[1].roe_m[1] == -1500.0


@pytest.mark.parametrize("key,named", [
    ("deputies[0].roe_m[6]", "index [6] is out of range: deputies[0].roe_m has 6 elements"),
    ("deputies[2].roe_m", "index [2] is out of range: deputies has 2 elements"),
    ("run.duration_days.x", "goes through run.duration_days = 3.0, which is a number"),
    ("run.name[0]", "goes through run.name = 'demo_formation', which is a string"),
    ("run[0]", "run is a table, not an array"),
    ("deputies.name", "deputies is an array: address an element with [i]"),
])
def test_override_bad_paths_are_clean_errors(demo, key, named):
    with pytest.raises(ScenarioError) as ei:
        parse_scenario(demo.read_text(), str(demo), overrides={key: 1.0})
    assert ei.value.key == key and named in str(ei.value)


def test_run_set_unchanged_and_element_form_on_the_command_line(demo, capsys):
    assert main(["validate", str(demo), "--set", "deputies[0].roe_m[1]=2500",
                 "--set", "actuators.time_sigma_s=0.2", "--set", "run.duration_s=7200"]) == 0
    assert "valid scenario" in capsys.readouterr().out
    assert main(["validate", str(demo), "--set", "deputies[0].roe_m[9]=1"]) == 2
    err = capsys.readouterr().err
    assert "deputies[0].roe_m[9]" in err and "out of range" in err and err.count("\n") == 1


# ------------------------------------------------------------------------------------------
# The file
# ------------------------------------------------------------------------------------------


def test_example_campaigns_validate(repo_root, capsys):
    files = sorted((repo_root / "scenarios" / "campaigns").glob("*.toml"))
    assert {f.stem for f in files} >= {"demo_mc", "demo_sweep", "demo_budget"}
    for f in files:
        assert main(["validate", str(f)]) == 0, capsys.readouterr().err
        assert "is a valid campaign" in capsys.readouterr().out


def test_toml_writer_round_trips_every_example_scenario(repo_root):
    for p in sorted((repo_root / "scenarios").glob("*.toml")):
        raw = tomllib.loads(p.read_text())
        assert tomllib.loads(dumps(raw)) == raw, p


def test_inline_scenario_is_the_same_run_as_the_file(demo, tmp_path):
    base = tomllib.loads(demo.read_text())
    text = head("unused").replace('scenario = "unused"\n', "")
    text += "\n" + dumps({"scenario": base})
    f = tmp_path / "inline.toml"
    f.write_text(text)
    c = load_campaign(f)
    assert c.inline and c.base_path == str(f.resolve())
    p = plan_campaign(c)
    ref = parse_scenario(demo.read_text(), str(demo), overrides={"run.duration_days": 0.2})
    assert p.base_cfg.deputies == ref.deputies and p.base_cfg.environment == ref.environment
    assert p.base_cfg.guidance == ref.guidance and p.base_cfg.duration_s == ref.duration_s


def test_dotted_and_quoted_set_keys_are_the_same(demo):
    a = parse_campaign(head(demo))
    b = parse_campaign(head(demo).replace('"run.duration_days" = 0.2', "run.duration_days = 0.2"))
    assert a.fixed == b.fixed == {"run.duration_days": 0.2}


# ------------------------------------------------------------------------------------------
# The sampler
# ------------------------------------------------------------------------------------------

DISPERSIONS = """
[[dispersions]]
key = "deputies[0].roe_m[1]"
distribution = "normal"
mean = 2000.0
sigma = 20.0
[[dispersions]]
key = "environment.density_error.bias"
distribution = "truncated_normal"
mean = 0.1
sigma = 0.1
low = -0.05
high = 0.4
[[dispersions]]
key = "bus.sixu.mass_kg"
distribution = "uniform"
low = 9.8
high = 10.2
[[dispersions]]
key = "guidance.settings.density_coefficient"
distribution = "lognormal"
median = 1.0
sigma_ln = 0.2
[[dispersions]]
key = "guidance.settings.f107_forecast_sfu"
distribution = "choice"
values = [130.0, 150.0, 170.0]
weights = [1.0, 2.0, 1.0]
"""


def test_sampler_has_the_configured_distributions(demo):
    """KS test (Massey 1951) of 1000 draws of each continuous dispersion against scipy.stats'
    distribution at a fixed master seed; chi-square (Pearson 1900) for the weighted choice. A
    deliberately wrong reference is rejected, so the test can fail."""
    c = parse_campaign(head(demo, extra=DISPERSIONS))
    n = 1000
    for d in c.dispersions[:4]:
        x = draws(d, c.master_seed, n)
        ref = d.dist.reference()
        p = stats.kstest(x, ref.cdf).pvalue
        assert p > 0.01, (d.key, p)
        wrong = stats.kstest(x, lambda v: ref.cdf(v - 0.3 * ref.std())).pvalue
        assert wrong < 1e-6, (d.key, wrong)
    tn = draws(c.dispersions[1], c.master_seed, n)
    assert tn.min() >= -0.05 and tn.max() <= 0.4
    ch = draws(c.dispersions[4], c.master_seed, n)
    counts = np.array([np.sum(ch == v) for v in (130.0, 150.0, 170.0)])
    assert counts.sum() == n
    assert stats.chisquare(counts, n * np.array([0.25, 0.5, 0.25])).pvalue > 0.01


def test_draws_and_seeds_depend_on_master_seed_and_draw_only(demo):
    c = parse_campaign(head(demo, runs=6, extra=DISPERSIONS))
    p = plan_campaign(c)
    assert [j.index for j in p.jobs] == list(range(6))
    assert len({j.seed for j in p.jobs}) == 6 and all(0 <= j.seed < 2**63 for j in p.jobs)
    assert [j.seed for j in p.jobs] == [run_seed(5, k) for k in range(6)]
    # a dispersion added at the end leaves the earlier draws and the seeds unchanged
    more = DISPERSIONS + '[[dispersions]]\nkey = "bus.sixu.cd"\ndistribution = "uniform"\nlow = 2.0\nhigh = 2.4\n'
    q = plan_campaign(parse_campaign(head(demo, runs=6, extra=more)))
    for a, b in zip(p.jobs, q.jobs):
        assert a.seed == b.seed and dict(a.params).items() <= dict(b.params).items()
    # another master seed, other draws
    r = plan_campaign(parse_campaign(head(demo, runs=6, extra=DISPERSIONS).replace(
        "master_seed = 5", "master_seed = 6")))
    assert all(a.seed != b.seed for a, b in zip(p.jobs, r.jobs))
    # the overrides of a run are what the log will store; its run.seed is the job's seed
    j = p.jobs[3]
    ov = dict(j.overrides)
    assert ov["run.seed"] == j.seed and ov["run.name"] == "t_0003" and j.log == "runs/t_0003.h5"
    cfg = parse_scenario(c.base_text, c.base_path, overrides=ov)
    assert cfg.seed == j.seed and cfg.deputies[0].roe_m[1] == dict(j.params)["deputies[0].roe_m[1]"]


def test_sweep_points_share_the_draws(demo):
    first = DISPERSIONS.split("[[dispersions]]")[1]
    c = parse_campaign(head(demo, runs=3, extra="[[dispersions]]" + first + """
[[sweeps]]
key = "guidance.settings.density_coefficient"
values = [0.5, 1.5]
[[sweeps]]
key = "guidance.cycle_s"
start = 2700.0
stop = 5400.0
num = 2
"""))
    p = plan_campaign(c)
    assert c.kind == "sweep" and len(p.grid) == 4 and p.n_runs == 12
    assert p.grid == ((0.5, 2700.0), (0.5, 5400.0), (1.5, 2700.0), (1.5, 5400.0))
    for j in p.jobs:
        assert j.index == j.grid_index * 3 + j.draw_index
        twin = p.jobs[j.draw_index]  # same draw at grid point 0
        assert j.seed == twin.seed
        assert dict(j.params)["deputies[0].roe_m[1]"] == dict(twin.params)["deputies[0].roe_m[1]"]
        assert dict(j.params)["guidance.cycle_s"] == p.grid[j.grid_index][1]


# ------------------------------------------------------------------------------------------
# Error budget
# ------------------------------------------------------------------------------------------


def test_error_budget_cases_switch_exactly_one_source(demo):
    c = parse_campaign(head(demo, runs=2, extra="[error_budget]\n"))
    p = plan_campaign(c)
    assert p.cases == ("all_off",) + SOURCES + ("all_on",)  # the demo has every source on
    nominal = p.solar_activity_off
    assert nominal == {"f107_sfu": 150.0, "f107a_sfu": 150.0, "ap": 15.0}
    for case in p.cases:
        jobs = [j for j in p.jobs if j.case == case]
        assert len(jobs) == 2 and [j.seed for j in jobs] == [run_seed(5, 0), run_seed(5, 1)]
        cfg = parse_scenario(c.base_text, c.base_path, overrides=dict(jobs[0].overrides))
        on = {s for s in SOURCES if source_state(cfg, s, nominal)[0]}
        want = set() if case == "all_off" else (set(SOURCES) if case == "all_on" else {case})
        assert on == want, case
        if case == "all_off":
            assert cfg.navigation.perfect and cfg.actuators.perfect
            assert cfg.environment.density_error.bias == cfg.environment.density_error.sigma == 0
            assert cfg.environment.solar_activity.source == "constant"


def test_error_budget_skips_sources_off_in_the_base(demo):
    c = parse_campaign(head(demo, runs=2, extra="""
        [error_budget]
        sources = ["density", "navigation"]
        """).replace('"run.duration_days" = 0.2', '"run.duration_days" = 0.2\n"actuators.pointing_sigma_deg" = 0.0'))
    p = plan_campaign(c)
    assert p.cases == ("all_off", "navigation", "density", "all_on")
    bad = parse_campaign(head(demo, extra='[error_budget]\nsources = ["pointing"]\n').replace(
        '"run.duration_days" = 0.2', '"run.duration_days" = 0.2\n"actuators.pointing_sigma_deg" = 0.0'))
    with pytest.raises(ScenarioError, match="'pointing' is off: actuators.pointing_sigma_deg = 0"):
        plan_campaign(bad)


# ------------------------------------------------------------------------------------------
# Bad campaign files: exit 2 before any run, the key named
# ------------------------------------------------------------------------------------------

BAD = [
    ("wrong_path", '[[dispersions]]\nkey = "deputies[0].roe_mm[1]"\ndistribution = "normal"\nmean = 0.0\nsigma = 1.0\n',
     ["dispersions[0].key", "deputies[0].roe_mm[1]", "does not resolve", "closest valid key: deputies[0].roe_m[1]"]),
    ("unknown_key", '[[dispersions]]\nkey = "actuators.dv_scale_sgma"\ndistribution = "uniform"\nlow = 0.0\nhigh = 0.1\n',
     ["actuators.dv_scale_sgma", "closest valid key: actuators.dv_scale_sigma"]),
    ("index", '[[dispersions]]\nkey = "deputies[0].roe_m[6]"\ndistribution = "uniform"\nlow = 0.0\nhigh = 0.1\n',
     ["deputies[0].roe_m[6]", "out of range", "closest valid key: deputies[0].roe_m["]),
    ("negative_mass", '[[dispersions]]\nkey = "bus.sixu.mass_kg"\ndistribution = "uniform"\nlow = -1.0\nhigh = 10.0\n',
     ["dispersions[0]: bus.sixu.mass_kg", "values from -1 to 10 (kg)", "(0, 10000]"]),
    ("negative_sigma", '[[dispersions]]\nkey = "environment.density_error.sigma"\ndistribution = "normal"\nmean = 0.15\nsigma = 0.1\n',
     ["environment.density_error.sigma", "from -0.449781 to 0.749781", "1e-9 and 1 - 1e-9 quantiles", "[0, 10]"]),
    ("bad_parameter", '[[dispersions]]\nkey = "bus.sixu.cd"\ndistribution = "normal"\nmean = 2.2\nsigma = -0.1\n',
     ["dispersions[0].sigma", ">= 0"]),
    ("wrong_parameter", '[[dispersions]]\nkey = "bus.sixu.cd"\ndistribution = "uniform"\nmean = 2.2\nlow = 2.0\nhigh = 2.4\n',
     ["dispersions[0].mean", "not a parameter of the uniform distribution"]),
    ("law_setting", '[[dispersions]]\nkey = "guidance.settings.density_coefficient"\ndistribution = "uniform"\nlow = 0.0\nhigh = 2.0\n',
     ["guidance.settings.density_coefficient", "refuses 0", "[0.001, 1000]"]),
    ("units", '[[dispersions]]\nkey = "bus.sixu.mass_kg"\ndistribution = "uniform"\nlow = 9.0\nhigh = 11.0\nunits = "g"\n',
     ["dispersions[0].units", "'kg'"]),
    ("integer_key", '[[dispersions]]\nkey = "environment.gravity_degree"\ndistribution = "uniform"\nlow = 2.0\nhigh = 8.0\n',
     ["environment.gravity_degree", "integer"]),
    ("sweep_string_key", '[[sweeps]]\nkey = "guidance.law"\nvalues = [1.0, 2.0]\n',
     ["sweeps[0].key", "guidance.law", "not numeric"]),
    ("sweep_string_values", '[[sweeps]]\nkey = "guidance.cycle_s"\nvalues = ["fast", 2.0]\n',
     ["sweeps[0].values", "numbers"]),
    ("sweep_bad_value", '[[sweeps]]\nkey = "guidance.cycle_s"\nvalues = [0.5, 5400.0]\n',
     ["sweeps[0]: guidance.cycle_s", "refuses 0.5"]),
    ("twice", '[[sweeps]]\nkey = "guidance.cycle_s"\nvalues = [2700.0, 5400.0]\n[[dispersions]]\nkey = "guidance.cycle_s"\ndistribution = "uniform"\nlow = 2000.0\nhigh = 3000.0\n',
     ["sweeps[0].key", "only once", "dispersions[0] has it too"]),
    ("budget_and_sweep", '[error_budget]\n[[sweeps]]\nkey = "guidance.cycle_s"\nvalues = [2700.0, 5400.0]\n',
     ["sweeps", "cannot be crossed"]),
    ("unknown_source", '[error_budget]\nsources = ["navigaton"]\n', ["error_budget.sources", "did you mean 'navigation'"]),
    ("unknown_table", '[dispersion]\nkey = "x"\n', ["dispersion", "did you mean 'dispersions'"]),
    # each value valid alone (perigee 196-207 km at e = 0.0005; 294-362 km at 500 km altitude),
    # never together: perigee = a (1 - e) - R_E = 6578-6588 km x (0.97-0.98) - 6378 km < 150 km
    ("combination", '[[dispersions]]\nkey = "chief.orbit.altitude_km"\ndistribution = "uniform"\nlow = 200.0\nhigh = 210.0\n'
     '[[dispersions]]\nkey = "chief.orbit.e"\ndistribution = "uniform"\nlow = 0.02\nhigh = 0.03\n',
     ["run 0 (t_0000)", "each value is allowed alone, but together", "chief.orbit.altitude_km = 20",
      "events.min_altitude_km = 150", "narrow the distributions"]),
]


@pytest.mark.parametrize("name,extra,named", BAD, ids=[b[0] for b in BAD])
def test_bad_campaign_fails_before_any_run(tmp_path, demo, capsys, monkeypatch, name, extra, named):
    import sim.campaign.execute

    monkeypatch.setattr(sim.campaign.execute, "run_campaign", lambda *a, **k: pytest.fail("ran"))
    f = tmp_path / "bad.toml"
    f.write_text(head(demo, extra=extra))
    out = tmp_path / "out"
    assert main(["campaign", str(f), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    for s in named:
        assert s in err, (s, err)
    assert not out.exists()
    assert main(["validate", str(f)]) == 2


@pytest.mark.parametrize("edit,named", [
    (("runs = 4", "runs = 0"), ["campaign.runs", "integer in [1"]),
    (("runs = 4\n", ""), ["campaign.runs", "required"]),
    (("demo_formation.toml", "demo_formaton.toml"), ["campaign.scenario", "no such scenario file",
                                                     "did you mean", "demo_formation.toml"]),
    (("master_seed = 5", "master_seed = -5"), ["campaign.master_seed"]),
    (('"run.duration_days" = 0.2', '"run.duration_dayz" = 0.2'), ["run.duration_dayz", "unknown key"]),
])
def test_bad_campaign_table(tmp_path, demo, capsys, edit, named):
    f = tmp_path / "bad.toml"
    f.write_text(head(demo).replace(*edit))
    assert main(["campaign", str(f), "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    for s in named:
        assert s in err, (s, err)


@pytest.mark.parametrize("value", ["[" * 5000 + "]" * 5000, "{a = " * 400 + "1" + "}" * 400])
def test_deeply_nested_campaign_file_is_refused_in_one_line(tmp_path, demo, capsys, value):
    """The parser runs out of recursion (Python's limit, about 1000 frames) on such a file: exit 2
    and one line, as for the scenario reader (common practice, no source)."""
    f = tmp_path / "deep.toml"
    f.write_text(head(demo) + f'"run.seed" = {value}\n')
    assert main(["campaign", str(f), "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err and "RecursionError" not in err, err
    assert "nested too deeply" in err or "not valid TOML" in err, err
    assert not (tmp_path / "out").exists()
    assert main(["validate", str(f)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err, err
    assert "a campaign file" in err or "not valid TOML" in err, err
