"""Data read as the analyst meant it: each mapped column's reading said before estimating,
text where a number is expected warned about, text cells in a numeric column counted and
optionally treated as missing, and the coding of text columns stated with the result.
The data is the shipped invented sample with columns altered for each case."""

from __future__ import annotations

import io
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from tests.helpers.app import make_app

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"


def _csv(frame: pd.DataFrame) -> bytes:
    out = io.StringIO()
    frame.to_csv(out, index=False)
    return out.getvalue().encode()


@pytest.fixture(name="room")
def fixture_room(tmp_path):
    from fastapi.testclient import TestClient

    app = make_app(tmp_path)
    with TestClient(app) as client:
        doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
        made = client.post("/api/sessions", json={"title": "demo", "name": "Fac", "document": doc}).json()
        sid, headers = made["session_id"], {"X-Arrowmoot-Token": made["token"]}
        assert client.post(f"/api/sessions/{sid}/commands", json={"type": "set_stage", "stage": "agreed"},
                           headers=headers).status_code == 200
        yield client, f"/api/sessions/{sid}/estimation", headers


def test_text_column_mapped_to_a_quantity_is_warned_and_its_coding_stated(room):
    client, base, headers = room
    frame = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    frame["site"] = np.array(["north", "east", "west"])[np.arange(len(frame)) % 3]
    data = client.put(f"{base}/data?name=c.csv", content=_csv(frame), headers=headers).json()["data"]
    assert [(w["variable"], w["severity"]) for w in data["warnings"]] == [("department", "note")]
    site = next(p for p in data["profile"] if p["name"] == "site")
    assert site["kind"] == "text" and site["levels"] == ["east", "north", "west"]
    mapping = {**data["mapping"], "age": "site"}
    r = client.put(f"{base}/mapping", json={"mapping": mapping}, headers=headers)
    assert r.status_code == 200, r.text
    [warning] = [w for w in r.json()["data"]["warnings"] if w["severity"] == "warning"]
    assert warning["variable"] == "age" and warning["column"] == "site"
    assert "3 categories" in warning["text"] and "'east' the reference level" in warning["text"]
    # the outcome must be a number: a text column there is warned about before any estimate
    bad = {**data["mapping"], "sick_days": "site"}
    bad.pop("age")
    bad["age"] = "age"
    warned = [w for w in client.put(f"{base}/mapping", json={"mapping": bad}, headers=headers).json()["data"]["warnings"]
              if w["severity"] == "warning"]
    assert [w["role"] for w in warned] == ["outcome"] and "must be a number" in warned[0]["text"]
    client.put(f"{base}/mapping", json={"mapping": mapping}, headers=headers)
    result = client.post(f"{base}/estimate", json={"checks": False}, headers=headers).json()["result"]
    if "age" in (result["adjustment_set"] or []):
        coded = result["columns"]["age"]
        assert coded["kind"] == "categorical" and coded["levels"] == ["east", "north", "west"]
        assert coded["reference_level"] == "east"


def test_text_cells_in_a_numeric_column_are_counted_and_can_count_as_missing(room):
    client, base, headers = room
    frame = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    frame["fitness"] = frame["fitness"].astype(object)
    every_seventh = np.arange(len(frame)) % 7 == 0
    frame.loc[every_seventh, "fitness"] = "unknown"
    data = client.put(f"{base}/data?name=c.csv", content=_csv(frame), headers=headers).json()["data"]
    fitness = next(p for p in data["profile"] if p["name"] == "fitness")
    assert fitness["text_cells"] == int(every_seventh.sum()) and fitness["text_values"] == ["unknown"]
    [warning] = [w for w in data["warnings"] if w["severity"] == "warning"]
    assert warning["variable"] == "fitness" and warning["text_cells"] == int(every_seventh.sum())
    before = client.post(f"{base}/estimate", json={}, headers=headers)
    assert before.status_code == 422 and "unknown" in before.text
    r = client.put(f"{base}/mapping", json={"mapping": data["mapping"], "text_as_missing": ["fitness"]},
                   headers=headers)
    assert r.status_code == 200, r.text
    after = r.json()["data"]
    assert [w["severity"] for w in after["warnings"]] == ["note"] and after["text_as_missing"] == ["fitness"]
    assert next(p for p in after["profile"] if p["name"] == "fitness")["kind"] == "number"
    result = client.post(f"{base}/estimate", json={}, headers=headers).json()["result"]
    assert result["n_dropped"] >= int(every_seventh.sum())
    assert not any(t["reason"] == "a text column has too many categories" for t in result["checks"]["tests"])
    refused = client.put(f"{base}/mapping", json={"mapping": data["mapping"], "text_as_missing": ["nope"]},
                         headers=headers)
    assert refused.status_code == 400 and "nope" in refused.text


def test_methods_offered_are_exactly_those_that_estimate(room):
    """Every method the panel offers estimates; every one it does not is refused, with a reason."""
    client, base, headers = room
    client.put(f"{base}/data?name=c.csv", content=(SAMPLE / "cycle_to_work.csv").read_bytes(), headers=headers)
    offer = client.get(base, headers=headers).json()["data"]["methods"]
    by_name = {m["name"]: m for m in offer}
    assert not by_name["standardization"]["applies"] and "binary (0/1) outcome" in by_name["standardization"]["why"]
    assert not by_name["front-door"]["applies"] and "front-door" in by_name["front-door"]["why"]
    for m in offer:
        r = client.post(f"{base}/estimate", json={"method": m["name"], "checks": False}, headers=headers)
        assert (r.status_code == 200) == m["applies"], (m, r.text)
        assert m["applies"] or m["why"]
