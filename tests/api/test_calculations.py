"""Each calculation endpoint against direct calls on the core, through the test client."""

from __future__ import annotations

import csv
import io
import math

import numpy as np
import pytest

from service.bases.catalogue import warm
from service.bases.compile import build_model
from service.bases.definitions import DeMoivre, Makeham
from service.version import service_version

SULT = Makeham(A=0.00022, B=2.7e-6, c=1.124)
SULT_JSON = {"type": "makeham", "A": 0.00022, "B": 0.0000027, "c": 1.124}
MODEL = warm(build_model(SULT))  # as the stored basis is: expansions built at load


def _core(values):
    """Core numbers as the API sends them: NaN and ±inf become None."""
    return [None if not math.isfinite(v) else v for v in np.ravel(values).tolist()]


def test_survival_matches_the_core(client):
    ages, t = [30.0, 65.5], [0.0, 0.5, 1.0, 10.0, 40.0]
    r = client.post(
        "/v1/survival",
        json={"basis": "standard-ultimate", "lives": [{"age": a} for a in ages], "t": t},
    )
    assert r.status_code == 200
    body = r.json()
    assert body["basis"]["id"] == "standard-ultimate"
    assert body["basis"]["fingerprint"].startswith("sha256:")
    assert body["service_version"] == service_version()
    a, d, tt = np.array(ages), np.zeros(2), np.array(t)
    for i, result in enumerate(body["results"]):
        assert result["age"] == ages[i] and result["duration"] == 0.0
        assert result["survival"] == _core(MODEL.survival(a, d, tt)[i])
        assert result["death"] == _core(MODEL.death(a, d, tt)[i])
        assert result["force"] == _core(MODEL.force(a, d, tt)[i])
        assert result["density"] == _core(MODEL.density(a, d, tt)[i])
    # a fact that does not depend on the core: ₀p_x = 1
    assert body["results"][0]["survival"][0] == 1.0


def test_values_that_do_not_exist_are_null(client):
    # de Moivre with ω = 100: at and past age 100 survival is 0 and the force does not exist
    r = client.post(
        "/v1/survival",
        json={"basis": {"type": "de-moivre", "omega": 100}, "lives": [{"age": 90}], "t": [5, 10, 20]},
    )
    assert r.status_code == 200
    assert "NaN" not in r.text and "Infinity" not in r.text
    result = r.json()["results"][0]
    assert result["survival"][0] == pytest.approx(0.5)  # (100 − 95)/(100 − 90)
    assert result["survival"][2] == 0.0
    assert result["force"][0] == pytest.approx(1 / 5)  # 1/(ω − x − t)
    assert result["force"][2] is None
    model = build_model(DeMoivre(omega=100.0))
    expected = model.force(np.array([90.0]), np.zeros(1), np.array([5.0, 10.0, 20.0]))[0]
    assert result["force"] == _core(expected)


def test_deferred_death(client):
    r = client.post(
        "/v1/deferred-death",
        json={"basis": SULT_JSON, "lives": [{"age": 50}], "deferral": [0, 1, 2.5], "period": 2},
    )
    assert r.status_code == 200
    body = r.json()
    assert body["basis"]["id"] is None
    expected = MODEL.deferred_death(np.array([50.0]), np.zeros(1), np.array([0, 1, 2.5]), 2.0)
    assert body["results"][0]["probability"] == _core(expected[0])
    # u|t q_x = u p_x − (u+t) p_x
    s = MODEL.survival(np.array([50.0]), np.zeros(1), np.array([1.0, 3.0]))[0]
    assert body["results"][0]["probability"][1] == pytest.approx(s[0] - s[1], rel=1e-9)


def test_period_defaults_to_one(client):
    one = client.post(
        "/v1/deferred-death",
        json={"basis": "standard-ultimate", "lives": [{"age": 50}], "deferral": [3]},
    ).json()
    explicit = client.post(
        "/v1/deferred-death",
        json={"basis": "standard-ultimate", "lives": [{"age": 50}], "deferral": [3], "period": 1},
    ).json()
    assert one["results"] == explicit["results"]


@pytest.mark.parametrize("term", [None, 10])
def test_expectation(client, term):
    payload = {"basis": "standard-ultimate", "lives": [{"age": 40}, {"age": 80.25}]}
    if term is not None:
        payload["term"] = term
    r = client.post("/v1/expectation", json=payload)
    assert r.status_code == 200
    a, d = np.array([40.0, 80.25]), np.zeros(2)
    summary = MODEL.expectation_summary(a, d, term)
    for i, result in enumerate(r.json()["results"]):
        got = [result[k] for k in ("complete", "curtate", "complete_variance", "curtate_variance")]
        assert got == [float(column[i]) for column in summary]
        # the one-call summary agrees with the separate core functions
        assert got == pytest.approx(
            [
                MODEL.complete_expectation(a, d, term)[i],
                MODEL.curtate_expectation(a, d, term)[i],
                MODEL.complete_variance(a, d, term)[i],
                MODEL.curtate_variance(a, d, term)[i],
            ],
            rel=1e-13,
        )
        if term is not None:
            assert result["complete"] <= term


def test_moments(client):
    r = client.post(
        "/v1/moments",
        json={"basis": "standard-ultimate", "lives": [{"age": 60}], "orders": [2, 1], "term": 20},
    )
    assert r.status_code == 200
    result = r.json()["results"][0]
    a, d = np.array([60.0]), np.zeros(1)
    assert result["complete"] == _core(MODEL.complete_moments(a, d, [2, 1], 20)[0])
    assert result["curtate"] == _core(MODEL.curtate_moments(a, d, [2, 1], 20)[0])
    e = client.post(
        "/v1/expectation", json={"basis": "standard-ultimate", "lives": [{"age": 60}], "term": 20}
    ).json()["results"][0]
    assert result["complete"][1] == pytest.approx(e["complete"], rel=1e-12)


def test_quantiles(client):
    r = client.post(
        "/v1/quantiles",
        json={"basis": "standard-ultimate", "lives": [{"age": 60}], "probabilities": [0.1, 0.5]},
    )
    assert r.status_code == 200
    result = r.json()["results"][0]
    a, d, p = np.array([60.0]), np.zeros(1), np.array([0.1, 0.5])
    assert result["complete"] == _core(MODEL.complete_quantiles(a, d, p)[0])
    assert result["curtate"] == _core(MODEL.curtate_quantiles(a, d, p)[0])
    # the median: ₜq_60 = 0.5 at t = the complete quantile
    q = MODEL.death(a, d, np.array([result["complete"][1]]))[0, 0]
    assert q == pytest.approx(0.5, abs=1e-9)
    assert all(float(k).is_integer() for k in result["curtate"])


def test_select_lives_use_their_duration(client):
    body = {
        "basis": "thistlemoor-2024-select",
        "lives": [{"age": 40, "duration": 0}, {"age": 40, "duration": 5}],
        "t": [1],
    }
    results = client.post("/v1/survival", json=body).json()["results"]
    assert results[0]["duration"] == 0 and results[1]["duration"] == 5
    # newly selected lives die less in their first year than ultimate lives of the same age
    assert results[0]["death"][0] < results[1]["death"][0]


def test_life_table_json(client):
    r = client.post(
        "/v1/life-table",
        json={"basis": "standard-ultimate", "start_age": 20, "end_age": 30},
    )
    assert r.status_code == 200
    result = r.json()["results"][0]
    expected = MODEL.life_table(20.0, 30.0, 100000.0, 0.0)
    assert result["age"] == expected["age"].tolist()
    assert result["age"][0] == 20 and result["age"][-1] == 30
    assert result["l"][0] == 100000.0  # the radix
    for column in ("l", "d", "q", "complete", "curtate"):
        assert result[column] == _core(expected[column])


def test_life_table_csv_when_asked(client):
    r = client.post(
        "/v1/life-table",
        json={"basis": "standard-ultimate", "start_age": 20, "end_age": 23, "radix": 1000},
        headers={"Accept": "text/csv"},
    )
    assert r.status_code == 200
    assert r.headers["content-type"].startswith("text/csv")
    assert r.headers["x-basis-fingerprint"].startswith("sha256:")
    rows = list(csv.reader(io.StringIO(r.text)))
    assert rows[0] == ["age", "l", "d", "q", "complete", "curtate"]
    assert len(rows) == 5
    expected = MODEL.life_table(20.0, 23.0, 1000.0, 0.0)
    for i, row in enumerate(rows[1:]):
        assert float(row[0]) == expected["age"][i]
        assert float(row[1]) == expected["l"][i]
        assert float(row[4]) == expected["complete"][i]


def test_life_table_json_when_json_preferred(client):
    r = client.post(
        "/v1/life-table",
        json={"basis": "standard-ultimate", "start_age": 20, "end_age": 21},
        headers={"Accept": "application/json, text/csv;q=0.5"},
    )
    assert r.headers["content-type"].startswith("application/json")


def test_a_batch_equals_its_lives_one_by_one(client):
    lives = [{"age": 25}, {"age": 70.3}, {"age": 101}]
    batch = client.post(
        "/v1/expectation", json={"basis": "thistlemoor-2024-female", "lives": lives}
    ).json()["results"]
    for life, result in zip(lives, batch):
        single = client.post(
            "/v1/expectation", json={"basis": "thistlemoor-2024-female", "lives": [life]}
        ).json()["results"][0]
        assert single == pytest.approx(result, rel=1e-12)


def test_large_request_runs_in_a_thread_and_agrees(client):
    ages = np.linspace(0, 100, 500)
    t = list(np.linspace(0, 50, 60))
    r = client.post(
        "/v1/survival",
        json={"basis": "standard-ultimate", "lives": [{"age": a} for a in ages.tolist()], "t": t},
    )
    assert r.status_code == 200
    results = r.json()["results"]
    expected = MODEL.survival(ages, np.zeros(ages.size), np.array(t))
    assert [res["survival"] for res in results] == expected.tolist()
