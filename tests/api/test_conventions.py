"""HTTP conventions (RFC 9110): Accept, 406, HEAD, and problem+json for every error status."""

from __future__ import annotations

import pytest

from service.api.conventions import AcceptError, choose, parse_accept

LIFE_TABLE = {"basis": "standard-ultimate", "start_age": 40, "end_age": 42}
SURVIVAL = {"basis": "standard-ultimate", "lives": [{"age": 60}, {"age": 61.5}], "t": [1, 10]}
JSON_CSV = ["application/json", "text/csv"]


# ---- the parser, against the grammar of RFC 9110 sections 12.4.2 and 12.5.1 ---------------


@pytest.mark.parametrize("weight", ["inf", "-inf", "1e400", "nan", "-1", "1.5", "2", "0.1234",
                                    "1.001", ".5", "0x1"])
def test_weights_outside_the_qvalue_grammar_are_refused(weight):
    # RFC 9110 §12.4.2: qvalue = ( "0" [ "." 0*3DIGIT ] ) / ( "1" [ "." 0*3("0") ] )
    with pytest.raises(AcceptError, match="weight must be a number from 0 to 1"):
        parse_accept(f"text/csv;q={weight}")


@pytest.mark.parametrize("weight,value", [("0", 0.0), ("0.", 0.0), ("0.5", 0.5), ("0.001", 0.001),
                                          ("1", 1.0), ("1.000", 1.0), ("0.999", 0.999)])
def test_weights_inside_the_grammar(weight, value):
    assert parse_accept(f"text/csv;q={weight}") == [("text", "csv", (), value)]


def test_parameters_before_the_weight_belong_to_the_media_type():
    assert parse_accept('TEXT/CSV; charset="UTF-8" ;q=0.3, */*;q=0.1') == [
        ("text", "csv", (("charset", "utf-8"),), 0.3),
        ("*", "*", (), 0.1),
    ]


def test_empty_parameters_are_allowed():
    # RFC 9110 §5.6.6: parameters = *( OWS ";" OWS [ parameter ] ), each one optional
    assert parse_accept("text/csv;; ;q=0.5;") == [("text", "csv", (), 0.5)]


@pytest.mark.parametrize("header", ["text", "*/csv", "text/csv;=", "text/csv;q", "a b/c"])
def test_malformed_ranges_are_refused(header):
    with pytest.raises(AcceptError):
        parse_accept(header)


@pytest.mark.parametrize(
    "header,chosen",
    [
        (None, "application/json"),
        ("", "application/json"),
        ("*/*", "application/json"),  # ties go to the resource's default
        ("text/csv", "text/csv"),
        ("text/csv;q=0", None),  # q=0 is "not acceptable" (RFC 9110 §12.4.2)
        ("text/csv;q=0, */*;q=0.1", "application/json"),
        # the most specific range decides (RFC 9110 §12.5.1): text/csv is refused although
        # text/* would take it
        ("text/*;q=0.9, text/csv;q=0, application/json;q=0.1", "application/json"),
        ("text/*, application/json;q=0.5", "text/csv"),
        ("text/csv;charset=utf-8", "text/csv"),  # the service writes CSV in UTF-8
        ("text/csv;charset=latin-1", None),
        ("application/xml", None),
        ("application/*;q=0.2, text/csv;q=0.1", "application/json"),
    ],
)
def test_choose(header, chosen):
    assert choose(header, JSON_CSV) == chosen


# ---- through the application -------------------------------------------------------------


@pytest.mark.parametrize("accept", ["text/csv;q=inf", "text/csv;q=1e400", "text/csv;q=-inf"])
def test_weights_that_are_not_numbers_from_0_to_1_answer_400_not_500(client, assert_problem, accept):
    r = client.post("/v1/life-table", json=LIFE_TABLE, headers={"Accept": accept})
    body = assert_problem(r, 400, "invalid-header")
    assert body["detail"].startswith("Accept: q=")


def test_q_0_does_not_select_csv(client, assert_problem):
    r = client.post("/v1/life-table", json=LIFE_TABLE, headers={"Accept": "text/csv;q=0"})
    body = assert_problem(r, 406, "not-acceptable")
    assert "application/json or text/csv" in body["detail"]
    r = client.post(
        "/v1/life-table", json=LIFE_TABLE, headers={"Accept": "text/csv;q=0, application/json"}
    )
    assert r.status_code == 200 and r.headers["content-type"] == "application/json"


@pytest.mark.parametrize("path", ["/health", "/v1/laws", "/ready", "/v1/bases/standard-ultimate"])
def test_406_when_accept_rules_out_json(client, assert_problem, path):
    assert_problem(client.get(path, headers={"Accept": "text/csv"}), 406, "not-acceptable")
    assert client.get(path, headers={"Accept": "application/*"}).status_code == 200


def test_the_openapi_document_is_json_for_a_json_client(client):
    r = client.get("/schema/openapi.json", headers={"Accept": "application/json"})
    assert r.status_code == 200 and r.json()["openapi"].startswith("3.")


def test_every_calculation_answers_csv_on_request(client):
    r = client.post("/v1/survival", json=SURVIVAL, headers={"Accept": "text/csv"})
    assert r.status_code == 200
    assert r.headers["content-type"] == "text/csv; charset=utf-8"
    lines = r.text.splitlines()
    assert lines[0] == "age,duration,t,survival,death,force,density"
    assert len(lines) == 1 + 2 * 2  # one row per life and t
    as_json = client.post("/v1/survival", json=SURVIVAL).json()
    row = lines[3].split(",")  # the second life at t = 1
    assert [float(v) for v in row[:3]] == [61.5, 0.0, 1.0]
    assert float(row[3]) == as_json["results"][1]["survival"][0]  # the same number, exactly
    assert r.headers["x-calculation-fingerprint"] == as_json["calculation_fingerprint"]


def test_present_values_as_csv_one_row_per_life_and_benefit(client):
    request = {
        "basis": "standard-ultimate", "lives": [{"age": 60}], "interest": {"rate": 0.05},
        "benefits": [{"type": "life-annuity"}, {"type": "pure-endowment", "term": 10}],
    }
    r = client.post("/v1/present-values", json=request, headers={"Accept": "text/csv"})
    lines = r.text.splitlines()
    assert lines[0] == (
        "age,duration,benefit,value,second_moment,standard_deviation,net_premium,approximation,"
        "exact_value,approximated,premium_term,policy_values,sensitivities"
    )
    expected = client.post("/v1/present-values", json=request).json()["results"][0]["benefits"]
    for line, benefit in zip(lines[1:], expected, strict=True):
        assert float(line.split(",")[3]) == benefit["value"]


@pytest.mark.parametrize("path", ["/health", "/ready", "/v1/bases", "/v1/laws", "/schema/openapi.json",
                                  "/v1/bases/standard-ultimate", "/"])
def test_head_answers_as_get_without_the_body(client, path):
    # RFC 9110 §9.3.2: the same status and headers as GET, no content
    got, head = client.get(path), client.head(path)
    assert head.status_code == got.status_code == 200
    assert head.content == b""
    assert head.headers["content-type"] == got.headers["content-type"]
    assert head.headers["content-length"] == str(len(got.content))


def test_405_allows_head_beside_get(client, assert_problem):
    r = client.post("/health")
    assert_problem(r, 405, "method-not-allowed")
    assert [m.strip() for m in r.headers["allow"].split(",")][:2] == ["GET", "HEAD"]


@pytest.mark.parametrize("path", ["/schema/unknown", "/schema/swagger/x", "/schema/openapi.yaml",
                                  "/schema/assets/nothing.js", "/nothing", "/v1/nothing"])
def test_every_404_is_problem_json(client, assert_problem, path):
    assert_problem(client.get(path), 404, "not-found")
    assert_problem(client.get(path, headers={"Accept": "text/html"}), 404, "not-found")
    assert_problem(client.get(path, headers={"Accept": "application/json"}), 404, "not-found")


def test_the_docs_page_loads_nothing_from_elsewhere(client):
    page = client.get("/schema").text
    assert "http://" not in page.replace("http://www.w3.org", "") and "https://" not in page
    for asset in ("swagger-ui-bundle.js", "swagger-ui-standalone-preset.js", "swagger-ui.css"):
        assert f"/schema/assets/{asset}" in page
        r = client.get(f"/schema/assets/{asset}")
        assert r.status_code == 200 and len(r.content) > 10_000
    csp = client.get("/schema").headers["content-security-policy"]
    assert "https:" not in csp and "script-src 'self'" in csp


def test_index_points_to_the_docs_the_contract_and_health(client):
    body = client.get("/").json()
    hrefs = {link["href"] for link in body["links"].values()}
    assert {"/schema", "/schema/openapi.json", "/health", "/ready"} <= hrefs
    for href in hrefs:
        assert client.get(href).status_code == 200, href
    page = client.get("/", headers={"Accept": "text/html,*/*;q=0.8"})
    assert page.headers["content-type"].startswith("text/html")
    assert 'href="/schema"' in page.text


def test_head_is_counted_under_its_route(client):
    client.head("/health")
    metrics = client.get("/metrics").text
    assert 'lifetime_http_requests_total{method="HEAD",route="/health",status="200"}' in metrics


@pytest.mark.parametrize("path,field", [("/v1/bases", "bases"),
                                        ("/v1/bases/thistlemoor-2024-annuitants/versions", "versions")])
def test_lists_of_records_answer_csv_on_request(client, path, field):
    import csv
    import io

    rows = list(csv.DictReader(io.StringIO(client.get(path, headers={"Accept": "text/csv"}).text)))
    records = client.get(path).json()[field]
    as_text = [{k: (str(v).lower() if isinstance(v, bool) else str(v)) for k, v in r.items()}
               for r in records]
    assert rows == as_text
