"""The demo scenario end to end: the adjustment the diagram demands recovers
the known effect (sample_data/make_cycle_to_work.py); the naive and the
over-adjusted estimates do not."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from app.estimation import estimators, service
from app.estimation.design import build_design
from app.graph.document import parse_document

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data"
TRUTH = json.loads((SAMPLE / "cycle_to_work.truth.json").read_text())["true_effect"]


@pytest.fixture(name="diagram", scope="module")
def fixture_diagram():
    return parse_document(json.loads((SAMPLE / "cycle_to_work.json").read_text()))


@pytest.fixture(name="frame", scope="module")
def fixture_frame():
    return pd.read_csv(SAMPLE / "cycle_to_work.csv")


def _covers(result, value):
    return result["ci"][0] <= value <= result["ci"][1]


def test_default_estimate_recovers_true_effect(diagram, frame):
    result = service.estimate(diagram, frame)
    assert result["strategy"] == "adjustment" and result["method"] == "regression"
    assert result["adjustment_set"] == ["age", "commute_km", "department", "fitness"]
    assert _covers(result, TRUTH)
    assert result["n_used"] == 4000 and result["n_dropped"] == 0
    assert result["unmeasured"] == ["health_consciousness"]
    assert any("not a substitute" in c for c in result["cautions"])
    assert result["checks"]["tested"] == result["checks"]["total"] > 10


def test_naive_and_over_adjusted_estimates_miss_true_effect(frame):
    mapping = {c: c for c in frame.columns}
    naive = estimators.regression(build_design(frame, mapping, treatment="bike_lease", outcome="sick_days"))
    over = estimators.regression(build_design(
        frame, mapping, treatment="bike_lease", outcome="sick_days",
        adjust=["age", "commute_km", "department", "fitness", "active_minutes", "engagement_score"]))
    assert not _covers(naive, TRUTH)
    assert not _covers(over, TRUTH)


def test_over_adjusted_set_is_refused_with_reasons(diagram, frame):
    from app.estimation.errors import BadMethod

    with pytest.raises(BadMethod, match="active_minutes"):
        service.estimate(diagram, frame, adjust=["age", "commute_km", "department", "fitness", "active_minutes"])


@pytest.mark.parametrize("method", ["weighting", "doubly-robust"])
def test_weighting_methods_recover_true_effect(diagram, frame, method):
    result = service.estimate(diagram, frame, method=method, checks=False)
    assert _covers(result, TRUTH)
    assert result["details"]["overlap"]["largest_weight"] > 1


def test_without_fitness_falls_back_to_the_instrument(diagram, frame):
    mapping = {c: c for c in frame.columns if c in diagram.names and c != "fitness"}
    result = service.estimate(diagram, frame, mapping, checks=False)
    assert result["strategy"] == "instrument" and result["method"] == "two-stage"
    assert result["instrument"] == "voucher_draw" and result["given"] == []
    assert result["fixes"] == [["fitness"]]
    assert _covers(result, TRUTH)
    assert result["details"]["first_stage_f"] > 10


def test_not_identified_names_the_variables_that_would_fix_it(diagram, frame):
    from app.estimation.errors import NotIdentified

    mapping = {c: c for c in ("bike_lease", "sick_days", "age", "department", "commute_km")}
    with pytest.raises(NotIdentified, match=r"\{fitness\}") as info:
        service.estimate(diagram, frame, mapping)
    assert info.value.item["fixes"] == [["fitness"]]


def test_sensitivity_for_demo_has_benchmarks_and_interval_path(diagram, frame):
    out = service.sensitivity(diagram, frame)
    reg = out["regression"]
    assert 0 < reg["robustness_value_alpha"] < reg["robustness_value"] < 1
    assert {b["variable"] for b in reg["benchmarks"]} == {"age", "commute_km", "department", "fitness"}
    assert reg["path"][0]["strength"] == 0 and reg["path"][0]["estimate"] == pytest.approx(reg["estimate"])
    assert out["e_value"]["e_value"] > 1


def test_disputed_arrow_leaves_the_optimal_set_unchanged(diagram, frame):
    """Whether fitness causes bike_lease or not, fitness causes sick_days, so the most
    efficient measured set keeps it (a confounder one way, a cause of the outcome the other),
    and both estimates cover the simulated true effect."""
    out = service.disputed_estimates(diagram, frame, None, [{"from": "fitness", "to": "bike_lease"}])
    with_arrow, without = out["rows"]
    assert with_arrow["choice"][0]["arrow"] == ["fitness", "bike_lease"] and without["choice"][0]["arrow"] is None
    assert with_arrow["as_drawn"] and not without["as_drawn"]
    assert "fitness" in with_arrow["adjustment_set"] and "fitness" in without["adjustment_set"]
    assert _covers(with_arrow, TRUTH) and _covers(without, TRUTH)


def test_cli_prints_contract_fields(capsys):
    """`arrowmoot estimate` through the project's command line entry point."""
    from app.cli import main

    code = main(["estimate", str(SAMPLE / "cycle_to_work.json"), str(SAMPLE / "cycle_to_work.csv"),
                 "--map", "fitness=", "--method", "two-stage"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    out = json.loads(captured.out)
    for key in ("estimate", "std_error", "ci", "method", "strategy", "instrument", "given", "n_used", "n_dropped", "checks"):
        assert key in out
    assert out["method"] == "two-stage" and out["instrument"] == "voucher_draw"
    assert out["ci"][0] <= TRUTH <= out["ci"][1]


def test_cli_default_reports_adjustment_set(capsys):
    from app.cli import main

    assert main(["estimate", str(SAMPLE / "cycle_to_work.json"), str(SAMPLE / "cycle_to_work.csv")]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["adjustment_set"] == ["age", "commute_km", "department", "fitness"]
    assert out["checks"]["tested"] > 0 and out["n_used"] == 4000


def test_cli_bad_mapping_exits_2_with_message():
    proc = subprocess.run(
        [sys.executable, "-m", "app.cli", "estimate", str(SAMPLE / "cycle_to_work.json"),
         str(SAMPLE / "cycle_to_work.csv"), "--map", "bike_lease=leased"],
        capture_output=True, text=True, cwd=ROOT, timeout=120,
    )
    assert proc.returncode == 2
    assert "'leased', which is not in the data" in proc.stderr
    assert proc.stdout == ""


def test_cli_unreadable_data_exits_2(tmp_path, capsys):
    from app.cli import main

    bad = tmp_path / "notes.csv"
    bad.write_bytes(b"\x00\x01\x02 binary")
    assert main(["estimate", str(SAMPLE / "cycle_to_work.json"), str(bad)]) == 2
    assert "not a table" in capsys.readouterr().err
