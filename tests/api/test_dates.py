"""Lives given by date of birth and of entry, as quote systems hold them: the ages derived,
the answers equal to those for the derived ages, the echo, and every bad date refused."""

from __future__ import annotations

from datetime import date

import pytest

PAIR = {"type": "joint-life", "members": ["thistlemoor-2024-male", "thistlemoor-2024-female"]}
SELECT = "thistlemoor-2024-select"
DROPPED = ("calculation_date", "age_convention", "calculation_fingerprint")


def _post(client, path, body):
    answer = client.post(path, json=body)
    assert answer.status_code == 200, answer.text
    return answer.json()


def _same_numbers(by_date: dict, by_age: dict) -> None:
    """Both answers alike but for the date echo and the fingerprint (the questions differ)."""
    assert {k: v for k, v in by_date.items() if k not in DROPPED} == {
        k: v for k, v in by_age.items() if k not in DROPPED
    }


@pytest.mark.parametrize(
    "path,extra",
    [
        ("/v1/survival", {"t": [0.5, 1, 10]}),
        ("/v1/deferred-death", {"deferral": [0, 5]}),
        ("/v1/expectation", {"term": 20}),
        ("/v1/moments", {"orders": [1, 2]}),
        ("/v1/quantiles", {"probabilities": [0.5]}),
        ("/v1/present-values", {"interest": {"rate": 0.03},
                                "benefits": [{"type": "life-annuity", "term": 10}]}),
        ("/v1/cash-flows", {"interest": {"rate": 0.03},
                            "benefits": [{"type": "life-insurance", "term": 5}]}),
    ],
)
def test_a_life_by_date_answers_as_the_life_by_its_derived_age(client, path, extra):
    # born 1979-04-17, valued 2024-10-17: 45 completed years, 183 of the 365 days from
    # 2024-04-17 to 2025-04-17 passed (hand computation): exact age 45 + 183/365
    dated = _post(client, path, {"basis": "standard-ultimate", "calculation_date": "2024-10-17",
                                 "lives": [{"date_of_birth": "1979-04-17"}], **extra})
    aged = _post(client, path, {"basis": "standard-ultimate", "lives": [{"age": 45 + 183 / 365}],
                                **extra})
    assert dated["results"][0]["age"] == 45 + 183 / 365
    _same_numbers(dated, aged)
    assert dated["calculation_date"] == "2024-10-17" and dated["age_convention"] == "exact"
    assert "age_convention" not in aged and "calculation_date" not in aged


@pytest.mark.parametrize(
    "convention,expected",
    [
        # born 1980-01-01, valued 2024-07-02: 183 of the 366 days of 2024 passed (hand
        # computation); exactly half rounds up to the nearest birthday
        ("exact", 44 + 183 / 366),
        ("last-birthday", 44.0),
        ("nearest-birthday", 45.0),
        ("next-birthday", 45.0),
    ],
)
def test_each_convention_is_echoed_with_the_age_it_gave(client, convention, expected):
    body = {"basis": "standard-ultimate", "calculation_date": "2024-07-02",
            "age_convention": convention, "lives": [{"date_of_birth": "1980-01-01"}, {"age": 50}],
            "t": [1]}
    answer = _post(client, "/v1/survival", body)
    assert answer["age_convention"] == convention
    # the life given by date gets the convention's age; the one given by age keeps it
    assert [r["age"] for r in answer["results"]] == [expected, 50.0]


def test_a_calculation_date_beside_ages_only_changes_nothing_but_the_echo(client):
    body = {"basis": "standard-ultimate", "lives": [{"age": 61.25}, {"age": 30}], "t": [1, 2]}
    plain = _post(client, "/v1/survival", body)
    dated = _post(client, "/v1/survival", {**body, "calculation_date": "2024-10-17",
                                           "age_convention": "next-birthday"})
    _same_numbers(dated, plain)
    assert dated["age_convention"] == "next-birthday"  # numbers are used as sent
    assert [r["age"] for r in dated["results"]] == [61.25, 30.0]


def test_an_exact_age_against_python_s_datetime(client):
    # the reference: Python's datetime, (calculation date − last birthday) over (next − last)
    born, on = date(1961, 11, 30), date(2025, 3, 14)
    last, following = date(2024, 11, 30), date(2025, 11, 30)
    reference = (on.year - born.year - 1) + (on - last).days / (following - last).days
    answer = _post(client, "/v1/expectation", {
        "basis": "standard-ultimate", "calculation_date": on.isoformat(),
        "lives": [{"date_of_birth": born.isoformat()}]})
    assert answer["results"][0]["age"] == pytest.approx(reference, rel=1e-15)


def test_a_date_of_entry_gives_the_duration_on_a_select_basis(client):
    # born 1979-04-17, entered 2022-01-01, valued 2024-10-17, ages last birthday: age 45,
    # duration 2 (the entry anniversary 2024-01-01 passed; hand computation), so selected at 43
    by_date = _post(client, "/v1/expectation", {
        "basis": SELECT, "calculation_date": "2024-10-17", "age_convention": "last-birthday",
        "lives": [{"date_of_birth": "1979-04-17", "date_of_entry": "2022-01-01"}]})
    by_age = _post(client, "/v1/expectation", {
        "basis": SELECT, "lives": [{"age": 45, "duration": 2}]})
    assert (by_date["results"][0]["age"], by_date["results"][0]["duration"]) == (45.0, 2.0)
    _same_numbers(by_date, by_age)
    # exactly, with the age given as a number: 2 years and the 290 of the 366 days from
    # 2024-01-01 to 2024-10-17 (31+29+31+30+31+30+31+31+30+16, hand computation)
    exact = _post(client, "/v1/survival", {
        "basis": SELECT, "calculation_date": "2024-10-17", "selection_age_rule": "nearest-birthday",
        "lives": [{"age": 45.0, "date_of_entry": "2022-01-01"}], "t": [1]})
    assert exact["results"][0]["duration"] == pytest.approx(2 + 290 / 366, rel=1e-15)


def test_a_status_of_several_lives_by_dates(client):
    # 1960-05-01 and 1963-11-20 valued 2024-05-01: 64 and 60 last birthday (hand computation)
    body = {"basis": PAIR, "calculation_date": "2024-05-01", "age_convention": "last-birthday",
            "lives": [{"dates_of_birth": ["1960-05-01", "1963-11-20"]}], "term": 10}
    by_date = _post(client, "/v1/expectation", body)
    by_age = _post(client, "/v1/expectation", {"basis": PAIR, "lives": [{"ages": [64, 60]}],
                                                "term": 10})
    assert by_date["results"][0]["ages"] == [64.0, 60.0]
    _same_numbers(by_date, by_age)


def test_the_fingerprint_covers_the_dates_and_the_convention(client):
    body = {"basis": "standard-ultimate", "calculation_date": "2024-10-17",
            "lives": [{"date_of_birth": "1979-04-17"}], "t": [1]}
    first = _post(client, "/v1/survival", body)["calculation_fingerprint"]
    for change in ({"calculation_date": "2024-10-18"}, {"age_convention": "last-birthday"},
                   {"lives": [{"date_of_birth": "1979-04-18"}]}):
        assert _post(client, "/v1/survival", {**body, **change})["calculation_fingerprint"] != first
    # the default convention written out is the same question
    again = _post(client, "/v1/survival", {**body, "age_convention": "exact"})
    assert again["calculation_fingerprint"] == first


def test_ten_thousand_lives_by_date(client):
    # a batch of the largest size, each life's age the one Python's datetime gives
    born = [date(1940 + k % 60, 1 + k % 12, 1 + k % 28) for k in range(10_000)]
    on = date(2024, 10, 17)
    answer = _post(client, "/v1/expectation", {
        "basis": "standard-ultimate", "calculation_date": on.isoformat(), "age_convention":
        "last-birthday", "lives": [{"date_of_birth": d.isoformat()} for d in born]})
    expected = [on.year - d.year - ((on.month, on.day) < (d.month, d.day)) for d in born]
    assert [r["age"] for r in answer["results"]] == expected


BASE = {"basis": "standard-ultimate", "calculation_date": "2024-10-17", "t": [1]}


@pytest.mark.parametrize(
    "change,status,kind,field",
    [
        # 2023 is a common year: 29 February 2023 does not exist (Gregorian calendar)
        ({"lives": [{"age": 40}, {"date_of_birth": "2023-02-29"}]}, 400, "invalid-request",
         "$.lives[1].date_of_birth"),
        ({"lives": [{"date_of_birth": "1979-13-01"}]}, 400, "invalid-request",
         "$.lives[0].date_of_birth"),
        ({"lives": [{"date_of_birth": 19790417}]}, 400, "invalid-request",
         "$.lives[0].date_of_birth"),
        ({"calculation_date": "17/10/2024", "lives": [{"age": 40}]}, 400, "invalid-request",
         "$.calculation_date"),
        ({"lives": [{"age": 40}, {"age": 50}, {"age": 60},
                    {"date_of_birth": "2024-10-18"}]}, 422, "outside-domain",
         "$.lives[3].date_of_birth"),
        ({"lives": [{"date_of_birth": "1979-04-17", "date_of_entry": "2024-10-18"}]}, 422,
         "outside-domain", "$.lives[0].date_of_entry"),
        ({"lives": [{"date_of_birth": "1979-04-17", "date_of_entry": "1979-04-16"}]}, 422,
         "outside-domain", "$.lives[0].date_of_entry"),
        ({"lives": [{"age": 45, "date_of_birth": "1979-04-17"}]}, 422, "outside-domain",
         "$.lives[0].date_of_birth"),
        ({"lives": [{"date_of_birth": "1979-04-17", "duration": 1,
                     "date_of_entry": "2020-01-01"}]}, 422, "outside-domain",
         "$.lives[0].date_of_entry"),
        ({"calculation_date": None, "lives": [{"age": 40}, {"date_of_birth": "1979-04-17"}]},
         422, "outside-domain", "$.calculation_date"),
        ({"age_convention": "age-nearest", "lives": [{"age": 40}]}, 400, "invalid-request",
         "$.age_convention"),
        ({"lives": [{"dates_of_birth": ["1979-04-17", "1980-01-01"]}]}, 422, "outside-domain",
         "$.lives[0].dates_of_birth"),
        ({"lives": [{"duration": 1}]}, 422, "outside-domain", "$.lives[0].age"),
        ({"lives": [{"date_of_birth": "1979-04-17", "unknown": 1}]}, 400, "invalid-request",
         "$.lives[0].unknown"),
    ],
)
def test_bad_dates_are_refused_naming_the_field(client, assert_problem, change, status, kind,
                                                field):
    body = {**BASE, **change}
    assert_problem(client.post("/v1/survival", json=body), status, kind, [field])


def test_the_messages_say_what_is_wrong(client):
    def message(body):
        return client.post("/v1/survival", json={**BASE, **body}).json()["errors"][0]["message"]

    assert "exists" in message({"lives": [{"date_of_birth": "2023-02-29"}]})
    assert message({"age_convention": "age-nearest", "lives": [{"age": 40}]}).endswith(
        "allowed: exact, last-birthday, nearest-birthday, next-birthday")
    assert "2024-10-17" in message({"lives": [{"date_of_birth": "2025-01-01"}]})
    assert "$.lives[0].date_of_birth" in message(
        {"calculation_date": None, "lives": [{"date_of_birth": "1979-04-17"}]})


@pytest.mark.parametrize(
    "lives,field",
    [
        ([{"date_of_birth": "1979-04-17"}], "$.lives[0].date_of_birth"),
        ([{"ages": [60, 58], "dates_of_birth": ["1960-05-01", "1963-11-20"]}],
         "$.lives[0].dates_of_birth"),
        ([{"dates_of_birth": ["1960-05-01", "1963-11-20"],
           "dates_of_entry": ["2024-05-02", "2020-01-01"]}], "$.lives[0].dates_of_entry[0]"),
        ([{"dates_of_birth": ["1960-05-01", "1963-11-20", "1970-01-01"]}],
         "$.lives[0].dates_of_birth"),
    ],
)
def test_bad_dates_of_a_status_name_the_member(client, assert_problem, lives, field):
    body = {"basis": PAIR, "calculation_date": "2024-05-01", "lives": lives, "t": [1]}
    assert_problem(client.post("/v1/survival", json=body), 422, "outside-domain", [field])
