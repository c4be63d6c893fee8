"""One registry per fact: every list of choices and parameters is read from its registry.

The registries: loss methods ``gisrun.engine.ENGINES`` (with each method's declared
``PARAMETERS``), storm kinds ``gisrun.storm.KINDS``, soil
classifications ``gisrun.parameters.soils.CLASSIFICATIONS`` and the fixed project-file
choices of ``gisrun.options`` (nodata rule, combine rule, dual-group condition, unit
system). The checks here are of gisrun's own wiring, not of hydrology: no external source.
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

import click
import numpy as np
import pandas as pd
import pytest
from bad_inputs_helpers import edit_toml, make_project, write_subcatchments

from gisrun import engine, options
from gisrun.cli.main import cli
from gisrun.config import project as project_file
from gisrun.config.areal import AREAL_KINDS
from gisrun.config.project import load_project
from gisrun.config.storms import FILE_KIND, STORM_KINDS, storm_from_config
from gisrun.engine import ENGINES, PARAMETERS, method_name, run_losses
from gisrun.errors import ParameterError, ProjectFileError, StormError, VectorError
from gisrun.parameters import composite, overrides
from gisrun.parameters.defaults import IMPERVIOUS_RULES, RULES
from gisrun.parameters.soils import CLASSIFICATIONS, valid_soil_labels
from gisrun.storm import KINDS, StormKey, StormKind, uniform
from gisrun.units import SI
from gisrun.workflow.pipeline import run

PACKAGE = Path(__file__).resolve().parents[1] / "gisrun"

#: Registry name sets that no consumer may spell out again.
REGISTRIES: dict[str, set[str]] = {
    "loss methods": set(ENGINES),
    "storm kinds": set(KINDS),
    "soil classifications": set(CLASSIFICATIONS),
    **{name: set(choices) for name, choices in options.CHOICES.items()},
}
#: Modules that used to repeat a registry's names and now read them from it.
CONSUMERS = ("config/project.py", "config/storms.py", "parameters/overrides.py",
             "parameters/composite.py", "parameters/assign.py", "parameters/defaults.py",
             "present/model_inputs.py", "parameters/equivalent.py", "parameters/lumping.py")

SPELLINGS = ["Green-Ampt", "green ampt", "green_ampt", " GREEN_AMPT "]


# --- one registry, derived lists ---------------------------------------------------------------


@pytest.mark.parametrize("module", CONSUMERS)
def test_consumers_spell_out_no_registry(module):
    """No literal tuple, list or set holding two or more names of one registry."""
    tree = ast.parse((PACKAGE / module).read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Tuple | ast.List | ast.Set):
            words = {e.value for e in node.elts
                     if isinstance(e, ast.Constant) and isinstance(e.value, str)}
            for registry, names in REGISTRIES.items():
                assert len(words & names) < 2, f"{module}:{node.lineno} repeats the {registry}"


def test_the_literal_check_sees_a_repeat():
    """The check above finds a repeated list (guards against a check that cannot fail)."""
    node = ast.parse('X = ("horton", "phi_index")').body[0].value
    words = {e.value for e in node.elts}
    assert len(words & REGISTRIES["loss methods"]) == 2


def test_lists_are_the_registries():
    assert overrides.LOSS_METHODS == tuple(ENGINES)
    declared = [c for c, p in PARAMETERS.items() if p.in_frame and p.overridable]
    assert list(overrides.PARAMETER_COLUMNS) == declared
    for column in (*overrides.PARAMETER_COLUMNS, *overrides.SOIL_PROPERTIES):
        assert column in overrides.accepted_columns()
    assert set(composite.PERVIOUS_AREA_WEIGHTED) == {
        c for c in overrides.PARAMETER_COLUMNS if PARAMETERS[c].composite == "pervious_area"}
    assert tuple(project_file.SOIL_CLASSIFICATIONS) == tuple(CLASSIFICATIONS)
    assert STORM_KINDS == (*KINDS, FILE_KIND, *AREAL_KINDS)


def test_every_method_module_declares_what_the_registry_needs():
    for name, module in ENGINES.items():
        assert module.NAME == name
        columns = {p.column for p in module.PARAMETERS}
        for p in module.PARAMETERS:  # a bound names another parameter of the method
            assert p.at_most is None or p.at_most in columns
        declared = {p.column: p for p in module.PARAMETERS}
        # lowering in turn: another parameter of the method, no loop, and only depths and
        # rates (lowering them gives more runoff; the search looks below the mean value)
        for p in module.PARAMETERS:
            seen = {p.column}
            while p.then_lower is not None:
                assert p.then_lower in declared and p.then_lower not in seen
                p = declared[p.then_lower]
                seen.add(p.column)
                assert p.unit in ("m/s", "m") and p.in_frame and not p.allowed
        for p in module.PARAMETERS:  # every default names a rule that exists
            assert p.default in RULES or p.default.startswith(("run_antecedent", "table:"))
            assert not isinstance(p.impervious, str) or p.impervious in IMPERVIOUS_RULES


def test_engine_range_is_the_declared_range():
    """The engine refuses what the declaration refuses (curve number in (0, 100])."""
    frame = pd.DataFrame({"curve_number": [100.5]})
    with pytest.raises(ParameterError, match=r"curve_number.*outside \(0\.0, 100\.0\]"):
        run_losses(frame, [0.01], 600.0, method="curve_number")
    table = pd.DataFrame({"soil_class": ["A"], "curve_number": [100.5]})
    with pytest.raises(ParameterError, match=r"must be greater than 0 and at most 100"):
        overrides.normalize_overrides(table)


def test_every_soil_classification_is_accepted_by_the_project_file(tmp_path):
    for i, name in enumerate(CLASSIFICATIONS):
        path = make_project(tmp_path / str(i))
        label = valid_soil_labels(name)[0]
        text = path.read_text()
        text = text.replace('classification = "hydrologic_soil_group"',
                            f'classification = "{name}"')
        path.write_text(text.replace('"1" = "A"', f'"1" = "{label}"').replace(
            '"2" = "B"', f'"2" = "{label}"'))
        assert load_project(path).soil.classification == name


def test_cli_choices_are_the_registries():
    """Every click.Choice of the command line lists exactly one registry's names, in order.

    The command line reads its choices from the registries; a list typed there again
    would drift from them.
    """
    registries = [tuple(ENGINES), tuple(KINDS), tuple(CLASSIFICATIONS), STORM_KINDS,
                  *[tuple(c) for c in options.CHOICES.values()]]
    found = []
    for command in _commands(cli):
        for param in command.params:
            if isinstance(param.type, click.Choice):
                choices = tuple(param.type.choices)
                found.append(choices)
                assert choices in registries, f"{command.name} {param.name}: {choices}"
    assert found, "the command line has no choice options to check"


def _commands(group: click.Command) -> list[click.Command]:
    out = [group]
    for sub in getattr(group, "commands", {}).values():
        out += _commands(sub)
    return out


# --- one reading of a loss method name ---------------------------------------------------------


@pytest.mark.parametrize("spelling", SPELLINGS)
def test_method_name_spellings_mean_the_same(spelling):
    assert method_name(spelling) == "green_ampt"


@pytest.mark.parametrize("spelling", SPELLINGS)
def test_spellings_through_the_project_file_and_overrides(tmp_path, spelling):
    path = make_project(tmp_path / "p")
    edit_toml(path, 'name = "green_ampt"', f'name = "{spelling}"')
    assert load_project(path).method == "green_ampt"
    table = pd.DataFrame({"soil_class": ["A"], "loss_method": [spelling]})
    assert overrides.normalize_overrides(table)["loss_method"].tolist() == ["green_ampt"]


@pytest.mark.parametrize("spelling", SPELLINGS)
def test_spellings_through_run_losses(spelling):
    units = pd.DataFrame({"ks_m_per_s": [1e-6], "suction_head_m": [0.1],
                          "moisture_deficit": [0.3], "depression_storage_m": [0.0],
                          "loss_method": [spelling]})
    rain = [0.004, 0.01, 0.002]
    by_name = run_losses(units, rain, 600.0, method="green_ampt")
    for result in (run_losses(units, rain, 600.0, method=spelling),
                   run_losses(units, rain, 600.0)):
        np.testing.assert_array_equal(result.excess_m, by_name.excess_m)
        assert result.methods == ("green_ampt",)


def test_spellings_through_the_subcatchment_method_field(tmp_path):
    path = make_project(tmp_path / "p")
    write_subcatchments(tmp_path / "p" / "sub.gpkg", how=["Curve Number", "curve-number"])
    edit_toml(path, 'id_field = "code"', 'id_field = "code"\nmethod_field = "how"')
    params = run(path).parameters
    assert set(params["loss_method"]) == {"curve_number"}


def test_a_misspelling_is_refused_the_same_way_everywhere(tmp_path):
    hint = "did you mean 'green_ampt'?"
    path = make_project(tmp_path / "p")
    edit_toml(path, 'name = "green_ampt"', 'name = "Grean-Ampt"')
    with pytest.raises(ProjectFileError, match=r"\[method\]\.name: unknown loss method") as err:
        load_project(path)
    assert hint in str(err.value)
    table = pd.DataFrame({"soil_class": ["A"], "loss_method": ["Grean-Ampt"]})
    with pytest.raises(ParameterError, match=r"row 1:loss_method: unknown loss method") as err:
        overrides.normalize_overrides(table)
    assert hint in str(err.value)
    with pytest.raises(ParameterError, match="unknown loss method") as err:
        run_losses(pd.DataFrame({"x": [1.0]}), [0.01], 600.0, method="Grean-Ampt")
    assert hint in str(err.value)
    path = make_project(tmp_path / "q")
    write_subcatchments(tmp_path / "q" / "sub.gpkg", how=["Grean-Ampt", None])
    edit_toml(path, 'id_field = "code"', 'id_field = "code"\nmethod_field = "how"')
    with pytest.raises(VectorError, match=r"sub\.gpkg:how:id=S1: unknown loss method") as err:
        run(path)
    assert hint in str(err.value)


# --- adding a kind or a method touches only its own files --------------------------------------


def test_a_storm_kind_is_one_registry_entry(monkeypatch):
    """A kind added to KINDS is read by the project file with no other change."""
    steady = StormKind(uniform, (StormKey("rain", "depth_m", "depth"),
                                 StormKey("hours", "duration_s", "minutes")),
                       (StormKey("step_min", "step_s", "minutes", default=10.0),),
                       default_name="steady_{rain}")
    monkeypatch.setitem(KINDS, "steady", steady)
    h = storm_from_config({"kind": "steady", "rain": 12, "hours": 60}, base_dir=Path("."),
                          units=SI, where="x")
    # 12 mm over 60 min in 10-min steps: 2 mm per step, by hand
    assert h.name == "steady_12mm" and len(h.depth_m) == 6
    np.testing.assert_allclose(h.depth_m, 0.002, rtol=1e-12)
    with pytest.raises(StormError, match=r"x\.depth: does not apply to kind 'steady'"):
        storm_from_config({"kind": "steady", "rain": 1, "hours": 60, "depth": 3},
                          base_dir=Path("."), units=SI, where="x")


def test_a_loss_method_is_found_by_its_module(tmp_path, monkeypatch):
    """A module with a NAME in the engine package joins ENGINES; nothing else lists it."""
    (tmp_path / "steady_loss.py").write_text(
        "from gisrun.engine.phi_index import (PARAMETERS, Params, State,\n"
        "                                      initial_state, step)\n"
        'NAME = "steady_loss"\nORDER = 99\n')
    monkeypatch.setattr(engine, "__path__", [*engine.__path__, str(tmp_path)])
    try:
        found = engine._discover()
    finally:
        sys.modules.pop("gisrun.engine.steady_loss", None)
    assert list(found) == [*ENGINES, "steady_loss"]
