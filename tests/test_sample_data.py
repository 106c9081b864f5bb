"""The demo scenario: the diagram parses, the generator is reproducible, and
the shipped CSV is exactly what the seeded generator writes."""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import networkx as nx
import pandas as pd
import pytest

from app.graph.document import parse_document

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"


def _generator():
    spec = importlib.util.spec_from_file_location("make_cycle_to_work", SAMPLE / "make_cycle_to_work.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(name="diagram", scope="module")
def fixture_diagram():
    return parse_document(json.loads((SAMPLE / "cycle_to_work.json").read_text()))


def test_demo_diagram_has_the_promised_roles(diagram):
    truth = json.loads((SAMPLE / "cycle_to_work.truth.json").read_text())
    assert diagram.treatment == ("bike_lease",) and diagram.outcome == ("sick_days",)
    assert diagram.latent == frozenset(truth["unmeasured"])
    graph = diagram.to_networkx()
    # mediator on a directed path, collider with both ends pointing in
    assert nx.has_path(graph, "bike_lease", truth["mediator"]) and nx.has_path(graph, truth["mediator"], "sick_days")
    assert set(graph.predecessors(truth["collider"])) == {"bike_lease", "sick_days"}
    # instrument: only reaches the outcome through the treatment
    assert list(graph.successors(truth["instrument"])) == ["bike_lease"]
    # every variable is placed on the canvas and explained
    assert all(v.x is not None and v.y is not None and v.label and v.description for v in diagram.variables)


def test_demo_adjustment_set_blocks_back_door_paths(diagram):
    """Back-door criterion (Pearl 2009, Causality, def. 3.3.1) checked with networkx d-separation."""
    truth = json.loads((SAMPLE / "cycle_to_work.truth.json").read_text())
    graph = diagram.to_networkx()
    graph.remove_edges_from(list(graph.out_edges("bike_lease")))
    assert nx.is_d_separator(graph, {"bike_lease"}, {"sick_days"}, set(truth["sufficient_adjustment"]))
    assert not nx.is_d_separator(graph, {"bike_lease"}, {"sick_days"}, set())


def test_generator_reproduces_shipped_csv():
    module = _generator()
    fresh = module.simulate()
    shipped = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    pd.testing.assert_frame_equal(
        fresh.reset_index(drop=True), shipped, check_dtype=False, check_exact=False, rtol=1e-9
    )
    assert abs(fresh.attrs["sample_effect"] - module.TRUE_EFFECT) < 0.05


def test_csv_columns_cover_every_measured_variable(diagram):
    shipped = pd.read_csv(SAMPLE / "cycle_to_work.csv", nrows=5)
    assert diagram.observed <= set(shipped.columns)
    assert not (diagram.latent & set(shipped.columns))


def test_outcome_is_a_count_with_more_spread_than_poisson():
    """Sick days are whole days in one calendar year; a Poisson count would have
    variance equal to its mean, the generator's frailty makes it larger."""
    shipped = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    days = shipped["sick_days"]
    assert (days >= 0).all() and (days == days.round()).all() and days.max() <= 366
    assert days.var() > 1.5 * days.mean()


def test_lease_starts_spread_over_the_lease_year_and_only_for_lessees():
    shipped = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    truth = json.loads((SAMPLE / "cycle_to_work.truth.json").read_text())
    starts = pd.to_datetime(shipped["lease_start"], format="%Y-%m-%d")
    assert (starts.notna() == (shipped["bike_lease"] == 1)).all()
    assert set(starts.dt.year.dropna().astype(int)) == {truth["lease_year"]}
    # leases start in every month of the year, not in one short period
    months = starts.dt.month.value_counts()
    assert len(months) == 12 and months.min() > 0.5 * months.mean()


def test_truth_file_marks_the_data_as_invented():
    truth = json.loads((SAMPLE / "cycle_to_work.truth.json").read_text())
    assert "invented" in truth["scenario"] and "demo only" in truth["scenario"]
    assert truth["share_of_rows_at_rate_floor"] < 0.01  # the linear mean holds for nearly every row
