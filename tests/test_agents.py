"""Agent catalogue: attributes, sources, aliases, user overrides, the agents file and the CLI."""

import json

import pytest

from courseplan.agents import catalogue, get_agent
from courseplan.agents.record import AGENT_FIELDS, CONFIDENCE, Agent
from courseplan.errors import AgentError, MissingInputError
from courseplan.io.agentfile import load_catalogue, read_agents_file

REQUIRED_AGENTS = ["NaCl", "NH4NO3", "urea", "CaCl2", "CaCl2.2H2O", "MgCl2", "KCl", "(NH4)2SO4", "NH4Cl"]
ATTRS = ["name", "label", "formula", "molar_mass_g_mol", "ions", "nitrogen_fraction", "chloride_fraction",
         "eutectic_c", "eutectic_mass_fraction", "enthalpy_solution_kj_mol", "purity",
         "crystal_water_fraction", "bulk_density_kg_m3", "bag_sizes_kg", "big_bag_kg", "bags_per_pallet",
         "oxidiser", "curve_approximate", "sources"]


def test_catalogue_has_the_issue_agents_and_attributes():
    cat = catalogue()
    for name in REQUIRED_AGENTS:
        assert name in cat
        ag = cat[name]
        for a in ATTRS:
            assert hasattr(ag, a), a
        assert ag.bag_sizes_kg == tuple(sorted(ag.bag_sizes_kg))
        assert 0 < ag.purity <= 1 and ag.purity + ag.crystal_water_fraction <= 1 + 1e-12
        assert isinstance(ag.bags_per_pallet, int)


@pytest.mark.parametrize("name, n_frac, cl_frac", [
    # by hand from the formulas with N 14.007, Cl 35.453, H 1.008, O 15.999, C 12.011 g/mol
    ("NH4NO3", 28.014 / 80.043, 0.0),
    ("urea", 28.014 / 60.056, 0.0),
    ("NH4Cl", 14.007 / 53.491, 35.453 / 53.491),
    ("(NH4)2SO4", 28.014 / 132.14, 0.0),
    ("NaCl", 0.0, 35.453 / 58.443),
    ("CaCl2", 0.0, 70.906 / 110.98),
    ("MgCl2", 0.0, 70.906 / 95.211),
    ("KCl", 0.0, 35.453 / 74.551),
])
def test_mass_fractions_from_formula(name, n_frac, cl_frac):
    ag = get_agent(name)
    assert ag.nitrogen_fraction == pytest.approx(n_frac, abs=1e-4)
    assert ag.chloride_fraction == pytest.approx(cl_frac, abs=1e-4)


def test_heat_of_solution_per_kg_matches_design_notes():
    # domain-data §3 [derived]: NH4NO3 ≈ 321 kJ/kg absorbed, NaCl ≈ 66, CaCl2 releases ≈ 733, MgCl2 ≈ 1680
    assert get_agent("NH4NO3").solution_heat_j_kg / 1e3 == pytest.approx(321, abs=1)
    assert get_agent("NaCl").solution_heat_j_kg / 1e3 == pytest.approx(66, abs=1)
    assert get_agent("CaCl2").solution_heat_j_kg / 1e3 == pytest.approx(-733, abs=1)
    assert get_agent("MgCl2").solution_heat_j_kg / 1e3 == pytest.approx(-1680, abs=5)


def test_every_value_has_a_source_with_confidence():
    for ag in catalogue().values():
        for a in ["molar_mass_g_mol", "eutectic_c", "eutectic_mass_fraction", "enthalpy_solution_kj_mol",
                  "curve", "purity", "bulk_density_kg_m3", "bag_sizes_kg", "nitrogen_fraction",
                  "chloride_fraction", "crystal_water_fraction"]:
            src = ag.sources.get(a)
            assert src, f"{ag.name}.{a} has no source"
            assert src.split(":")[0].split(" ")[0] in CONFIDENCE, f"{ag.name}.{a}: {src}"


def test_curves_without_rows_are_marked_approximate():
    for ag in catalogue().values():
        if not ag.curve:
            assert ag.curve_approximate, ag.name
    assert get_agent("NaCl").curve_approximate is False
    assert get_agent("urea").curve_approximate is True


def test_oxidisers():
    assert get_agent("NH4NO3").oxidiser and not get_agent("NaCl").oxidiser


@pytest.mark.parametrize("alias, name", [("rock salt", "NaCl"), ("NACL", "NaCl"), ("an", "NH4NO3"),
                                         ("Urea", "urea"), ("calcium chloride flake", "CaCl2.2H2O"),
                                         ("CaCl2·2H2O", "CaCl2.2H2O"), ("ammonium sulphate", "(NH4)2SO4")])
def test_aliases(alias, name):
    assert get_agent(alias).name == name


def test_unknown_agent_lists_valid_names():
    with pytest.raises(AgentError) as err:
        get_agent("NaCI")  # capital i
    msg = str(err.value)
    assert "NaCl" in msg and "urea" in msg and "NH4NO3" in msg
    assert isinstance(err.value, KeyError)


def test_override_builtin_field_and_source():
    cat = catalogue({"NaCl": {"purity": 0.9, "bag_sizes_kg": [50, 25]}}, source="mine.toml")
    ag = cat["NaCl"]
    assert ag.purity == 0.9 and ag.bag_sizes_kg == (25.0, 50.0)
    assert ag.sources["purity"] == "user: mine.toml"
    assert catalogue()["NaCl"].purity == 0.95  # built-in untouched


def test_override_by_alias_and_agents_wrapper():
    cat = catalogue({"agents": {"rock salt": {"bulk_density_kg_m3": 1150}}})
    assert cat["NaCl"].bulk_density_kg_m3 == 1150


def test_new_agent_from_base():
    cat = catalogue({"sea salt": {"base": "NaCl", "label": "sea salt", "purity": 0.85}})
    ag = cat["sea salt"]
    assert ag.name == "sea salt" and ag.purity == 0.85 and ag.eutectic_c == get_agent("NaCl").eutectic_c
    assert get_agent("sea salt", cat) is ag


def test_new_agent_without_base_needs_fields():
    with pytest.raises(AgentError, match="lacks"):
        catalogue({"mystery": {"label": "x"}})
    cat = catalogue({"mystery": {"label": "x", "formula": "X", "molar_mass_g_mol": 100.0, "ions": 2,
                                 "eutectic_c": -5.0, "eutectic_mass_fraction": 0.2,
                                 "enthalpy_solution_kj_mol": 10.0}})
    assert cat["mystery"].curve_approximate is True


@pytest.mark.parametrize("table, match", [
    ({"NaCl": {"purty": 0.9}}, "purity"),
    ({"NaCl": {"purity": "high"}}, "number"),
    ({"NaCl": {"purity": 1.5}}, "range"),
    ({"NaCl": {"curve": [[0.1, -3.0], [0.05, -6.0]]}}, "rise"),
    ({"NaCl": {"curve": [[0.3, -3.0]]}}, "eutectic"),
    ({"NaCl": 3}, "table"),
])
def test_bad_overrides_raise(table, match):
    with pytest.raises(AgentError, match=match):
        catalogue(table)


def test_agent_fields_exposed():
    assert "eutectic_c" in AGENT_FIELDS and Agent.__dataclass_params__.frozen


def test_agents_file(tmp_path):
    p = tmp_path / "agents.toml"
    p.write_text('["sea salt"]\nbase = "NaCl"\npurity = 0.85\nsources = { purity = "practice: sheet" }\n',
                 encoding="utf-8")
    data = read_agents_file(p)
    assert data["sea salt"]["purity"] == 0.85
    cat = load_catalogue(p)
    assert cat["sea salt"].sources["purity"] == "practice: sheet"
    bad = tmp_path / "bad.toml"
    bad.write_text("[x\n", encoding="utf-8")
    with pytest.raises(AgentError, match="TOML"):
        read_agents_file(bad)
    with pytest.raises(MissingInputError):
        read_agents_file(tmp_path / "nope.toml")


def test_cli_agents_json_and_table():
    from click.testing import CliRunner

    from courseplan.cli.agents import agents_command

    r = CliRunner().invoke(agents_command, ["--json"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.output)
    assert set(REQUIRED_AGENTS) <= set(data)
    assert data["NaCl"]["eutectic_c"] == -21.12 and "sources" in data["NaCl"]
    r = CliRunner().invoke(agents_command, [])
    assert r.exit_code == 0 and "NH4NO3" in r.output
    r = CliRunner().invoke(agents_command, ["--wide"])  # the notes column is in the wide table only
    assert r.exit_code == 0 and "NH4NO3" in r.output and "oxidiser" in r.output


def test_cli_agents_bad_file(tmp_path):
    from click.testing import CliRunner

    from courseplan.cli.agents import agents_command

    p = tmp_path / "a.toml"
    p.write_text('[NaCl]\npurity = 7\n', encoding="utf-8")
    r = CliRunner().invoke(agents_command, ["--agents-file", str(p)])
    assert r.exit_code != 0 and "purity" in r.output and "Traceback" not in r.output


def test_package_level_api_accepts_scalars_and_arrays():
    import numpy as np

    import courseplan

    assert courseplan.freezing_point("rock salt", 0.10) == pytest.approx(-6.56, abs=0.1)
    w = courseplan.liquidus_mass_fraction("NaCl", np.array([-1.19, -6.56]))
    np.testing.assert_allclose(w, [0.02, 0.10], atol=5e-4)
    e = courseplan.mixture_equilibrium("NaCl", 1 / 3, 1.0, 0.0)
    assert e.temperature_c == pytest.approx(-21.12) and e.undissolved_kg > 0 and e.melted_kg > 0
    assert courseplan.refreeze_ratio("urea", -2.0) > 0
    assert courseplan.get_agent("an").name == "NH4NO3" and "KCl" in courseplan.catalogue()
