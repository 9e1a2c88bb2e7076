"""Transforms through the HTTP API: results, composition and every bad-input path."""

from __future__ import annotations

import math

import pytest

G = {"type": "gompertz", "B": 3e-5, "c": 1.1}


def _post(client, path, body):
    return client.post(path, json=body)


def test_rated_gompertz_equals_gompertz_with_m_b(client):
    rated = {"type": "adjusted", "base": G, "force_multiplier": 2.0}
    same = {"type": "gompertz", "B": 6e-5, "c": 1.1}  # standard result: m μ of Gompertz
    lives = [{"age": 60}, {"age": 75.5}]
    a = _post(client, "/v1/expectation", {"basis": rated, "lives": lives}).json()["results"]
    b = _post(client, "/v1/expectation", {"basis": same, "lives": lives}).json()["results"]
    for ra, rb in zip(a, b):
        assert ra["age"] == rb["age"]
        for key in ("complete", "curtate", "complete_variance", "curtate_variance"):
            assert ra[key] == pytest.approx(rb[key], rel=1e-10)


def test_joint_life_of_rated_members_echoes_ages(client):
    member = {"type": "adjusted", "base": "thistlemoor-2024-female", "q_multiplier": 1.2}
    body = {
        "basis": {"type": "joint-life", "members": ["thistlemoor-2024-male", member]},
        "lives": [{"ages": [65, 62]}],
        "t": [0, 10],
    }
    r = _post(client, "/v1/survival", body)
    assert r.status_code == 200, r.text
    result = r.json()["results"][0]
    assert result["ages"] == [65.0, 62.0] and "age" not in result
    # textbook identity: under independence ₜp_xy = ₜp_x ₜp_y
    px = _post(client, "/v1/survival", {"basis": "thistlemoor-2024-male", "lives": [{"age": 65}], "t": [10]}).json()["results"][0]["survival"][0]
    py = _post(client, "/v1/survival", {"basis": member, "lives": [{"age": 62}], "t": [10]}).json()["results"][0]["survival"][0]
    assert result["survival"][1] == pytest.approx(px * py, rel=1e-13)
    for path, extra in (
        ("/v1/deferred-death", {"deferral": [0, 5]}),
        ("/v1/expectation", {"term": 10}),
        ("/v1/moments", {"orders": [1, 2]}),
        ("/v1/quantiles", {"probabilities": [0.5]}),
    ):
        r = _post(client, path, {"basis": body["basis"], "lives": body["lives"], **extra})
        assert r.status_code == 200, (path, r.text)


def test_improved_and_stored_id_base(client):
    basis = {
        "type": "improved",
        "base": "thistlemoor-2024-male",
        "base_year": 2024,
        "valuation_year": 2024,
        "rates": {"start_age": 0, "values": [0.0]},
    }
    a = _post(client, "/v1/expectation", {"basis": basis, "lives": [{"age": 65.5}]}).json()["results"][0]
    b = _post(client, "/v1/expectation", {"basis": "thistlemoor-2024-male", "lives": [{"age": 65.5}]}).json()["results"][0]
    assert a["complete"] == pytest.approx(b["complete"], rel=1e-13)  # zero rates: the base table
    r = _post(client, "/v1/life-table", {"basis": basis, "start_age": 65, "end_age": 70})
    assert r.status_code == 200 and all(math.isfinite(v) for v in r.json()["results"][0]["q"])


@pytest.mark.parametrize(
    ("basis", "lives", "status", "kind", "field"),
    [
        ({"type": "adjusted", "base": "no-such-basis", "force_multiplier": 2}, [{"age": 60}], 404, "unknown-basis", "$.basis"),
        ({"type": "adjusted", "base": G, "q_multiplier": 2}, [{"age": 60}], 422, "outside-domain", "$.basis.q_multiplier"),
        ({"type": "adjusted", "base": G, "extra_force": -0.01}, [{"age": 60}], 422, "outside-domain", "$.basis.extra_force"),
        ({"type": "adjusted", "base": {"type": "gompertz", "B": 1e-5, "c": 0.9}, "force_multiplier": 2}, [{"age": 60}], 422, "outside-domain", "$.basis.base.c"),
        ({"type": "joint-life", "members": [G, G]}, [{"ages": [60, 50, 40]}], 422, "outside-domain", "$.lives[0].ages"),
        ({"type": "joint-life", "members": [G, G]}, [{"age": 60}], 422, "outside-domain", "$.lives[0].age"),
        (G, [{"ages": [60, 50]}], 422, "outside-domain", "$.lives[0].ages"),
        ({"type": "last-survivor", "members": [G, {"type": "table", "start_age": 0, "q": [0.1, 2], "fractional_ages": "udd"}]}, [{"ages": [1, 1]}], 422, "outside-domain", "$.basis.members[1].q[1]"),
        ({"type": "improved", "base": "thistlemoor-2024-male", "base_year": 2024, "valuation_year": 2025, "rates_by_year": {"start_age": 0, "start_year": 2025, "grid": [[0.01, 0.02], [0.01]]}}, [{"age": 60}], 422, "outside-domain", "$.basis.rates_by_year.grid[1]"),
        ({"type": "improved", "base": G, "base_year": 2024, "valuation_year": 2025, "rates": {"start_age": 0, "values": [0.01]}}, [{"age": 60}], 422, "outside-domain", "$.basis.base"),
        ({"type": "adjusted", "base": {"type": "joint-life", "members": [G, G]}, "force_multiplier": 2}, [{"age": 60}], 422, "outside-domain", "$.basis.base"),
    ],
)
def test_bad_transforms(client, assert_problem, basis, lives, status, kind, field):
    r = _post(client, "/v1/expectation", {"basis": basis, "lives": lives})
    assert_problem(r, status, kind, [field])


def test_nesting_depth_is_limited(client, assert_problem):
    basis = G
    for _ in range(9):
        basis = {"type": "adjusted", "base": basis, "force_multiplier": 1.01}
    r = _post(client, "/v1/expectation", {"basis": basis, "lives": [{"age": 60}]})
    assert_problem(r, 422, "outside-domain", ["$.basis"])


def test_laws_list_the_transforms_and_the_rating_order(client):
    laws = {law["type"]: law for law in client.get("/v1/laws").json()["laws"]}
    for kind in ("adjusted", "improved", "joint-life", "last-survivor"):
        assert kind in laws
    assert any("order of application" in rule for rule in laws["adjusted"]["rules"])


def test_improved_select_table_through_the_api(client, assert_problem):
    basis = {
        "type": "improved",
        "base": "thistlemoor-2024-select",
        "base_year": 2024,
        "valuation_year": 2030,
        "rates": {"start_age": 0, "values": [0.0]},
    }
    lives = [{"age": 45, "duration": 0}, {"age": 46.5, "duration": 1.5}, {"age": 70.25, "duration": 5}]
    a = _post(client, "/v1/expectation", {"basis": basis, "lives": lives}).json()["results"]
    b = _post(client, "/v1/expectation", {"basis": "thistlemoor-2024-select", "lives": lives}).json()["results"]
    for ra, rb in zip(a, b):  # zero rates: the select table itself
        assert ra["complete"] == pytest.approx(rb["complete"], rel=1e-13)
        assert ra["curtate"] == pytest.approx(rb["curtate"], rel=1e-13)
    improving = {**basis, "rates": {"start_age": 0, "values": [0.01]}}
    c = _post(client, "/v1/expectation", {"basis": improving, "lives": lives}).json()["results"]
    assert all(rc["complete"] > rb["complete"] for rc, rb in zip(c, b))  # lighter mortality
    r = _post(client, "/v1/life-table", {"basis": improving, "start_age": 45, "end_age": 50, "duration": 1})
    assert r.status_code == 200 and all(math.isfinite(v) for v in r.json()["results"][0]["q"])
    # the select table's own rules for lives carry over: selected at 44.5, a life is placed by
    # the selection-age rule (last-birthday: selected at 44, so duration 1 at age 45)
    r = _post(client, "/v1/expectation", {"basis": improving, "lives": [{"age": 45, "duration": 0.5}]})
    same = _post(client, "/v1/expectation", {"basis": improving, "lives": [{"age": 45, "duration": 1}]})
    assert r.json()["results"] == same.json()["results"]
    r = _post(client, "/v1/expectation", {"basis": improving, "lives": [{"age": 19.5, "duration": 0.25}]})
    assert_problem(r, 422, "outside-domain", ["$.lives[0].duration"])


JOINT = {
    "type": "joint-life",
    "members": ["thistlemoor-2024-male", {"type": "adjusted", "base": "thistlemoor-2024-female", "force_multiplier": 1.25}],
}
LAST = {**JOINT, "type": "last-survivor"}


@pytest.mark.parametrize("basis", [JOINT, LAST], ids=["joint-life", "last-survivor"])
def test_status_life_table(client, basis):
    body = {"basis": basis, "start_ages": [65, 62], "end_age": 75, "radix": 1000}
    r = _post(client, "/v1/life-table", body)
    assert r.status_code == 200, r.text
    result = r.json()["results"][0]
    assert result["start_ages"] == [65.0, 62.0] and result["durations"] == [0.0, 0.0]
    assert "age" not in result and "start_age" not in result
    assert result["ages"] == [[65.0 + k, 62.0 + k] for k in range(11)]
    # textbook identities under independence: l_k = radix ₖp_x ₖp_y (joint life), and
    # radix (ₖp_x + ₖp_y − ₖp_x ₖp_y) (last survivor), from each member's own survival
    t = list(range(11))
    px = _post(client, "/v1/survival", {"basis": basis["members"][0], "lives": [{"age": 65}], "t": t}).json()["results"][0]["survival"]
    py = _post(client, "/v1/survival", {"basis": basis["members"][1], "lives": [{"age": 62}], "t": t}).json()["results"][0]["survival"]
    for k in t:
        status = px[k] * py[k] if basis is JOINT else px[k] + py[k] - px[k] * py[k]
        assert result["l"][k] == pytest.approx(1000 * status, rel=1e-12)
        assert result["d"][k] == pytest.approx(result["l"][k] * result["q"][k], rel=1e-15)
    # e̊ and e of the status at row 0 are the /v1/expectation answer for the same lives
    e = _post(client, "/v1/expectation", {"basis": basis, "lives": [{"ages": [65, 62]}]}).json()["results"][0]
    assert result["complete"][0] == pytest.approx(e["complete"], rel=1e-12)
    assert result["curtate"][0] == pytest.approx(e["curtate"], rel=1e-12)
    # the rows follow the status from its start: l_{k+1} = l_k − d_k
    for k in t[:-1]:
        assert result["l"][k + 1] == pytest.approx(result["l"][k] - result["d"][k], rel=1e-12)
    e5 = _post(client, "/v1/expectation", {"basis": basis, "lives": [{"ages": [70, 67]}]}).json()["results"][0]
    if basis is JOINT:
        # both members alive at row 5: the answer for the lives aged 70 and 67
        assert result["complete"][5] == pytest.approx(e5["complete"], rel=1e-12)
    else:
        # inclusion–exclusion (textbook identity under independence):
        # e̊ at row 5 = (₅p_x e̊_70 + ₅p_y e̊_67 − ₅p_x ₅p_y e̊_{70:67}) / ₅p_{x̄ȳ}
        def single(member, age):
            return _post(client, "/v1/expectation", {"basis": member, "lives": [{"age": age}]}).json()["results"][0]["complete"]

        joint5 = _post(client, "/v1/expectation", {"basis": {**JOINT, "members": basis["members"]}, "lives": [{"ages": [70, 67]}]}).json()["results"][0]["complete"]
        tail = px[5] * single(basis["members"][0], 70) + py[5] * single(basis["members"][1], 67) - px[5] * py[5] * joint5
        assert result["complete"][5] == pytest.approx(tail / (px[5] + py[5] - px[5] * py[5]), rel=1e-10)


def test_status_life_table_as_csv_with_durations(client):
    basis = {"type": "joint-life", "members": ["thistlemoor-2024-select", "thistlemoor-2024-female"]}
    body = {"basis": basis, "start_ages": [41, 38], "durations": [1, 0], "end_age": 44}
    r = client.post("/v1/life-table", json=body, headers={"Accept": "text/csv"})
    assert r.status_code == 200 and r.headers["content-type"].startswith("text/csv")
    lines = r.text.splitlines()
    assert lines[0] == "age_0,age_1,l,d,q,complete,curtate"
    result = _post(client, "/v1/life-table", body).json()["results"][0]
    assert result["durations"] == [1.0, 0.0]
    assert len(lines) == 5
    for k, line in enumerate(lines[1:]):
        cells = [float(v) for v in line.split(",")]
        assert cells[:2] == result["ages"][k]
        assert cells[2:] == [result[c][k] for c in ("l", "d", "q", "complete", "curtate")]
    # the select member, selected at 40, moves along its select row: e̊ at row 0 is the
    # status answer for the lives given with the same durations
    e = _post(client, "/v1/expectation", {"basis": basis, "lives": [{"ages": [41, 38], "durations": [1, 0]}]}).json()["results"][0]
    assert result["complete"][0] == pytest.approx(e["complete"], rel=1e-12)


@pytest.mark.parametrize(
    ("body", "field"),
    [
        ({"basis": JOINT, "start_age": 65, "start_ages": [65, 62], "end_age": 70}, "$.start_ages"),
        ({"basis": JOINT, "start_age": 65, "end_age": 70}, "$.start_age"),
        ({"basis": JOINT, "end_age": 70}, "$.start_ages"),
        ({"basis": JOINT, "start_ages": [65, 62, 60], "end_age": 70}, "$.start_ages"),
        ({"basis": JOINT, "start_ages": [65, 62], "durations": [0, 0, 0], "end_age": 70}, "$.durations"),
        ({"basis": JOINT, "start_ages": [65, 62], "duration": 1, "end_age": 70}, "$.duration"),
        ({"basis": JOINT, "start_ages": [65, 62], "end_age": 60}, "$.end_age"),
        ({"basis": JOINT, "start_ages": [65, 130], "end_age": 70}, "$.start_ages[1]"),
        ({"basis": JOINT, "start_ages": [65, 62], "end_age": 125}, "$.end_age"),
        ({"basis": JOINT, "start_ages": [65, 62], "end_age": 5000}, "$.end_age"),
        ({"basis": {"type": "joint-life", "members": ["thistlemoor-2024-select", G]}, "start_ages": [41, 38], "durations": [0.5, 0], "end_age": 44}, "$.durations[0]"),
        ({"basis": G, "start_ages": [65, 62], "end_age": 70}, "$.start_ages"),
        ({"basis": G, "start_age": 65, "durations": [0, 0], "end_age": 70}, "$.durations"),
        ({"basis": G, "end_age": 70}, "$.start_age"),
    ],
)
def test_status_life_table_errors(client, assert_problem, body, field):
    r = _post(client, "/v1/life-table", body)
    assert_problem(r, 422, "outside-domain", [field])
    assert "NaN" not in r.text and "Infinity" not in r.text


def test_status_life_table_schema_errors(client, assert_problem):
    r = _post(client, "/v1/life-table", {"basis": JOINT, "start_ages": [65], "end_age": 70})
    assert_problem(r, 422, "outside-domain", ["$.start_ages"])
    r = _post(client, "/v1/life-table", {"basis": JOINT, "start_ages": [65, -1], "end_age": 70})
    assert_problem(r, 422, "outside-domain", ["$.start_ages[1]"])
