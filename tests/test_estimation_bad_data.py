"""Bad data is refused with a message naming what is wrong."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
from app.web.errors import status_of
import pytest

from app.estimation import errors as E
from app.estimation import service
from app.estimation.design import build_design, check_mapping
from app.estimation.tables import load_table, profile_table, read_table_bytes
from app.graph.document import parse_document

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"


@pytest.fixture(name="diagram", scope="module")
def fixture_diagram():
    return parse_document(json.loads((SAMPLE / "cycle_to_work.json").read_text()))


@pytest.fixture(name="frame")
def fixture_frame():
    return pd.read_csv(SAMPLE / "cycle_to_work.csv", nrows=500)


def _write(tmp_path, name, content: bytes) -> Path:
    path = tmp_path / name
    path.write_bytes(content)
    return path


@pytest.mark.parametrize("content, error, match", [
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", E.NotATable, "binary file"),
    (b"just one line of prose without any delimiter\nand another\n", E.NotATable, "single column"),
    (b"", E.EmptyTable, "is empty"),
    (b"a,b,c\n", E.EmptyTable, "no data rows"),
    (b"a,b\n1,2\n", E.TooFewRows, "only one data row"),
    (b"a,a\n1,2\n3,4\n", E.NotATable, "duplicate column names"),
    (b"a,b\n1,2\n3,4,5\n", E.NotATable, "could not be read as a CSV table: .*Expected 2 columns"),
])
def test_load_table_refuses_unusable_files(tmp_path, content, error, match):
    with pytest.raises(error, match=match):
        load_table(_write(tmp_path, "upload.csv", content))


def test_load_table_refuses_file_over_limit(tmp_path):
    path = _write(tmp_path, "big.csv", b"a,b\n" + b"1,2\n" * 1000)
    with pytest.raises(E.FileTooLarge, match="the limit is 1.0 KB") as info:
        load_table(path, max_bytes=1024)
    assert status_of(info.value) == 413


def test_load_table_reads_parquet(tmp_path, frame):
    path = tmp_path / "demo.parquet"
    frame.to_parquet(path)
    loaded = load_table(path)
    pd.testing.assert_frame_equal(loaded, frame, check_dtype=False)


def test_profile_describes_columns(frame):
    frame = frame.copy()
    frame.loc[:9, "fitness"] = np.nan
    profile = {p["name"]: p for p in profile_table(frame)}
    assert profile["bike_lease"]["binary"] and profile["bike_lease"]["kind"] == "binary"
    assert profile["department"]["kind"] == "text" and profile["department"]["distinct"] == 3
    assert profile["fitness"]["missing"] == 10 and profile["fitness"]["missing_share"] == pytest.approx(0.02)
    assert profile["age"]["min"] >= 20 and profile["age"]["max"] <= 64


def test_all_missing_column_is_refused(diagram, frame):
    frame["fitness"] = np.nan
    with pytest.raises(E.AllMissingColumn, match="'fitness'.*no values at all"):
        service.estimate(diagram, frame)


def test_constant_treatment_is_refused(diagram, frame):
    frame["bike_lease"] = 1
    with pytest.raises(E.ConstantColumn, match="treatment column 'bike_lease' takes the single value 1"):
        service.estimate(diagram, frame)


def test_perfectly_collinear_adjustment_columns_are_refused(frame):
    frame["age_months"] = frame["age"] * 12
    frame["fitness_copy"] = 2 * frame["fitness"] - frame["age"] + 3
    mapping = {c: c for c in frame.columns}
    with pytest.raises(E.CollinearColumns, match="perfectly collinear.*'age'.*'fitness'.*'fitness_copy'"):
        build_design(frame, mapping, treatment="bike_lease", outcome="sick_days",
                     adjust=["age", "fitness", "fitness_copy"])


def test_constant_adjustment_column_is_refused(frame):
    frame["site"] = 4.0
    with pytest.raises(E.CollinearColumns, match="'site' takes a single value"):
        build_design(frame, {c: c for c in frame.columns}, treatment="bike_lease", outcome="sick_days", adjust=["site"])


def test_text_in_a_numeric_column_is_refused_with_the_lines(diagram, frame):
    frame["sick_days"] = frame["sick_days"].astype(object)
    frame.loc[3, "sick_days"] = "n/a"
    frame.loc[7, "sick_days"] = "twelve"
    with pytest.raises(E.NonNumericColumn, match=r"'sick_days'.*'n/a', 'twelve' \(file lines 5, 9\)"):
        service.estimate(diagram, frame)


def test_text_in_a_mostly_numeric_covariate_is_refused(frame):
    frame["age"] = frame["age"].astype(object)
    frame.loc[0, "age"] = "unknown"
    with pytest.raises(E.NonNumericColumn, match="'age'.*mostly numbers.*'unknown'"):
        build_design(frame, {c: c for c in frame.columns}, treatment="bike_lease", outcome="sick_days", adjust=["age"])


def test_two_level_text_treatment_is_coded(frame):
    frame["bike_lease"] = frame["bike_lease"].map({1: "yes", 0: "no"})
    design = build_design(frame, {c: c for c in frame.columns}, treatment="bike_lease", outcome="sick_days")
    assert design.t_binary and design.columns["bike_lease"].treated_level == "yes"
    assert design.t.sum() == (frame["bike_lease"] == "yes").sum()


def test_missing_values_are_dropped_and_counted(diagram, frame):
    frame.loc[:24, "commute_km"] = np.nan
    result = service.estimate(diagram, frame, checks=False)
    assert result["n_dropped"] == 25 and result["n_used"] == 475


def test_too_few_complete_rows_is_refused(frame):
    frame.loc[2:, "age"] = np.nan
    with pytest.raises(E.TooFewRows, match="only 2 row"):
        build_design(frame, {c: c for c in frame.columns}, treatment="bike_lease", outcome="sick_days", adjust=["age"])


@pytest.mark.parametrize("mapping, match", [
    ({"bike_lease": "nope"}, "not in the data"),
    ({"nobody": "bike_lease"}, "not a variable of the diagram"),
    ({"bike_lease": "age", "sick_days": "age"}, "mapped to both"),
    ("bike_lease=age", "must be an object"),
])
def test_bad_mappings_are_refused(diagram, frame, mapping, match):
    with pytest.raises(E.BadMapping, match=match):
        check_mapping(mapping, diagram.names, frame.columns)


def test_unknown_method_is_refused(diagram, frame):
    with pytest.raises(E.BadMethod, match="unknown method 'magic'"):
        service.estimate(diagram, frame, method="magic")


def test_weighting_needs_binary_treatment(diagram, frame):
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    doc["treatment"], doc["outcome"] = ["active_minutes"], ["sick_days"]
    with pytest.raises(E.BadMethod, match="binary"):
        service.estimate(parse_document(doc), frame, method="weighting")


def test_read_table_bytes_matches_file_reader(tmp_path):
    data = (SAMPLE / "cycle_to_work.csv").read_bytes()
    pd.testing.assert_frame_equal(read_table_bytes(data), load_table(SAMPLE / "cycle_to_work.csv"))
