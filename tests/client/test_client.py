"""The Python client against the real server, started as a process on 127.0.0.1."""

from __future__ import annotations

import asyncio
import math
import subprocess
import sys
import threading
import time
from datetime import date

import httpx
import msgspec
import pytest

from service.api import schemas as s
from service.api.value_schemas import PresentValuesRequest
from service.bases import definitions as d
from service.client import (
    AsyncLifetimeClient,
    CashFlowsResponse,
    LifetimeClient,
    LifetimeServiceError,
    PresentValuesResponse,
)
from service.launch import CODE_ROOT, LocalService, free_port, service_environment, spawn, stop

pytestmark = pytest.mark.slow


def test_importing_the_client_does_not_import_litestar_or_the_core():
    code = (
        "import service.client, sys; "
        "assert 'litestar' not in sys.modules, 'litestar'; "
        "assert 'numpy' not in sys.modules, 'numpy'"
    )
    result = subprocess.run(
        [sys.executable, "-c", code], cwd=CODE_ROOT, env=service_environment(),
        capture_output=True, text=True, timeout=60,
    )
    assert result.returncode == 0, result.stderr


def test_every_calculation_answers_with_its_typed_response(service):
    lives = [{"age": 60}, {"age": 61.5}]
    with LifetimeClient(service.url) as client:
        survival = client.survival(basis="standard-ultimate", lives=lives, t=[0, 1, 10])
        deferred = client.deferred_death(
            basis="standard-ultimate", lives=lives, deferral=[0, 1], period=1
        )
        expectation = client.expectation(basis="standard-ultimate", lives=lives)
        moments = client.moments(basis="standard-ultimate", lives=lives, orders=[1, 2])
        quantiles = client.quantiles(basis="standard-ultimate", lives=lives, probabilities=[0.5])
        table = client.life_table(basis="standard-ultimate", start_age=60, end_age=62)

    assert isinstance(survival, s.SurvivalResponse)
    assert isinstance(deferred, s.DeferredDeathResponse)
    assert isinstance(expectation, s.ExpectationResponse)
    assert isinstance(moments, s.MomentsResponse)
    assert isinstance(quantiles, s.QuantilesResponse)
    assert isinstance(table, s.LifeTableResponse)
    for answer in (survival, deferred, expectation, moments, quantiles):
        assert answer.basis.id == "standard-ultimate"
        assert answer.basis.fingerprint.startswith("sha256:")
        assert [r.age for r in answer.results] == [60.0, 61.5]

    first = survival.results[0]
    assert first.survival[0] == 1.0 and first.survival[1] > first.survival[2] > 0
    # P(K_x = 0) = q_x, and the first moment is the expectation
    assert math.isclose(deferred.results[0].probability[0], first.death[1], rel_tol=1e-12)
    for e, m in zip(expectation.results, moments.results):
        assert math.isclose(m.complete[0], e.complete, rel_tol=1e-9)
        assert math.isclose(m.complete[1] - e.complete**2, e.complete_variance, rel_tol=1e-6)
        assert 0 < e.curtate < e.complete
    assert 0 < quantiles.results[0].curtate[0] <= quantiles.results[0].complete[0]
    assert table.results[0].age == [60.0, 61.0, 62.0]
    assert table.results[0].l[0] == 100_000.0


def test_the_client_decodes_the_same_numbers_the_service_sends(service):
    body = {"basis": "thistlemoor-2024-female", "lives": [{"age": 65}], "t": [1, 5, 25]}
    raw = httpx.post(f"{service.url}/v1/survival", json=body, timeout=10).json()
    with LifetimeClient(service.url) as client:
        typed = client.survival(**body)
        from_struct = client.send(msgspec.convert(body, s.SurvivalRequest))
    assert msgspec.to_builtins(typed) == raw
    assert from_struct == typed


def test_a_stored_definition_sent_inline_has_the_stored_fingerprint(service):
    with LifetimeClient(service.url) as client:
        listed = {b.id: b.fingerprint for b in client.bases().bases}
        detail = client.basis("thistlemoor-2024-annuitants")
        inline = client.expectation(basis=detail.definition, lives=[{"age": 70}])
        as_dict = client.expectation(basis=msgspec.to_builtins(detail.definition), lives=[{"age": 70}])
        laws = client.laws()
    assert isinstance(detail.definition, d.Makeham)
    assert inline.basis.id is None
    assert inline.basis.fingerprint == detail.fingerprint == listed[detail.id]
    assert as_dict == inline
    assert "makeham" in {law.type for law in laws.laws}


def test_transforms_and_several_lives_go_through_the_client(service):
    rated = d.Adjusted(base="thistlemoor-2024-male", q_multiplier=2.0)
    couple = d.JointLife(members=["thistlemoor-2024-male", "thistlemoor-2024-female"])
    with LifetimeClient(service.url) as client:
        base = client.expectation(basis="thistlemoor-2024-male", lives=[{"age": 50}])
        heavier = client.expectation(basis=rated, lives=[{"age": 50}])
        joint = client.expectation(basis=couple, lives=[{"ages": [50, 48]}])
    assert heavier.results[0].complete < base.results[0].complete
    assert joint.results[0].ages == [50.0, 48.0]
    assert joint.results[0].complete < base.results[0].complete


def test_present_values_decode_into_the_client_structs(service):
    request = {
        "basis": "thistlemoor-2024-annuitants",
        "lives": [{"age": 65}],
        "interest": {"rate": 0.03},
        "benefits": [
            {"type": "life-annuity", "timing": "advance"},
            {"type": "life-insurance", "term": 10, "net_premium": {"premium_term": 10}},
        ],
    }
    with LifetimeClient(service.url) as client:
        answer = client.send(msgspec.convert(request, PresentValuesRequest))
        same = client.present_values(**request)
    assert isinstance(answer, PresentValuesResponse) and answer == same
    annuity, insurance = answer.results[0].benefits
    # ä_x = (1 − A_x)/d ties the two: at least the annuity is worth more than 1 and less
    # than the annuity certain for 60 years
    assert 1 < annuity.value < (1 - 1.03**-60) / (0.03 / 1.03)
    assert 0 < insurance.value < 1 and insurance.net_premium > 0
    assert annuity.standard_deviation == pytest.approx(
        math.sqrt(annuity.second_moment - annuity.value**2), rel=1e-6
    )


def test_cash_flows_as_structs_and_csv(service):
    request = {
        "basis": "thistlemoor-2024-male",
        "lives": [{"age": 45}, {"age": 50}],
        "interest": {"rate": 0.04},
        "benefits": [{"type": "life-insurance", "decreasing": True, "term": 3, "net_premium": {}}],
    }
    with LifetimeClient(service.url) as client:
        answer = client.cash_flows(**request)
        text = client.cash_flows_csv(**request)
    assert isinstance(answer, CashFlowsResponse)
    assert answer.period_end == [1.0, 2.0, 3.0]
    # the totals are the sums over the two lives (invented Thistlemoor data)
    outgo = [r.benefits[0].benefit_outgo for r in answer.results]
    assert answer.total.benefits[0].benefit_outgo == pytest.approx(
        [a + b for a, b in zip(*outgo)], rel=1e-15)
    lines = text.strip().splitlines()
    assert lines[0] == "life,benefit,period_start,period_end,in_force,benefit_outgo,premium_income"
    assert len(lines) == 1 + 3 * 3  # two lives and the total, three periods


def test_life_table_as_csv(service):
    with LifetimeClient(service.url) as client:
        text = client.life_table_csv(basis="standard-ultimate", start_age=40, end_age=42)
        table = client.life_table(basis="standard-ultimate", start_age=40, end_age=42)
    lines = text.strip().splitlines()
    assert lines[0] == "age,l,d,q,complete,curtate"
    assert [float(line.split(",")[0]) for line in lines[1:]] == table.results[0].age


def test_operations(service):
    with LifetimeClient(service.url) as client:
        assert client.health().status == "ok"
        assert client.ready().stored_bases >= 5
        assert "lifetime_http_requests_total" in client.metrics()


def test_an_impossible_request_raises_the_problem_with_its_fields(service):
    with LifetimeClient(service.url) as client:
        with pytest.raises(LifetimeServiceError) as caught:
            client.expectation(
                basis={"type": "makeham", "A": -0.001, "B": 0.0001, "c": 1.1},
                lives=[{"age": 60}],
            )
    error = caught.value
    assert error.status == 422 and error.sent
    assert error.title == "Outside the domain"
    assert error.type == "/problems/outside-domain"
    assert error.errors and error.errors[0][0] == "$.basis.A"
    assert "A must be greater than" in error.detail
    assert error.request_id


def test_an_unknown_basis_is_404(service):
    with LifetimeClient(service.url) as client:
        with pytest.raises(LifetimeServiceError) as by_id:
            client.basis("no-such-basis")
        with pytest.raises(LifetimeServiceError) as in_request:
            client.expectation(basis="no-such-basis", lives=[{"age": 60}])
    assert by_id.value.status == 404 and in_request.value.status == 404
    assert "no-such-basis" in in_request.value.detail


def test_a_request_off_the_schema_is_refused_before_sending(service):
    with LifetimeClient(service.url) as client:
        with pytest.raises(LifetimeServiceError) as caught:
            client.survival(basis="standard-ultimate", lives=[{"age": -1}], t=[1])
        with pytest.raises(LifetimeServiceError) as unknown:
            client.expectation(basis="standard-ultimate", lives=[{"age": 60}], horizon=5)
    assert caught.value.status is None and not caught.value.sent
    assert caught.value.errors[0][0] == "$.lives[0].age"
    assert not unknown.value.sent and "horizon" in unknown.value.detail


@pytest.mark.parametrize(
    "method,body",
    [
        ("expectation", {"basis": "standard-ultimate", "lives": [{"age": 60}], "horizon": 5}),
        ("survival", {"basis": "standard-ultimate", "lives": [{"agee": 60}], "t": [1]}),
        ("survival", {"basis": {"type": "gompertz", "B": 0.001, "c": 1.1, "D": 2},
                      "lives": [{"age": 60}], "t": [1]}),
        ("moments", {"basis": "standard-ultimate", "lives": [{"age": 60}], "orders": [9]}),
        ("quantiles", {"basis": "standard-ultimate", "lives": [{"age": "60"}],
                       "probabilities": [0.5]}),
        ("present_values", {"basis": "standard-ultimate", "lives": [{"age": 60}],
                            "interest": {"rate": 0.03}, "benefits": [{"type": "tontine"}]}),
    ],
)
def test_refused_before_sending_in_the_words_the_service_answers(service, method, body):
    path = "/v1/" + method.replace("_", "-")
    answered = httpx.post(f"{service.url}{path}", json=body, timeout=10)
    # off the schema is a 400; a value of the right type outside its bounds (order 9) a 422
    assert answered.status_code == (422 if method == "moments" else 400)
    problem = answered.json()
    with LifetimeClient(service.url, retries=0) as client:
        with pytest.raises(LifetimeServiceError) as caught:
            getattr(client, method)(**body)
    error = caught.value
    assert not error.sent
    assert (error.title, error.detail, error.type) == (
        problem["title"], problem["detail"], problem["type"]
    )
    assert error.errors == [(e["field"], e["message"]) for e in problem["errors"]]


def test_the_client_uses_the_service_s_titles():
    from service.api.problems import PROBLEM_KINDS as PROBLEMS
    from service.client import INVALID_REQUEST_TITLE, OUTSIDE_DOMAIN_TITLE

    assert PROBLEMS["invalid-request"][1] == INVALID_REQUEST_TITLE
    assert PROBLEMS["outside-domain"][1] == OUTSIDE_DOMAIN_TITLE


def test_every_method_has_explicit_typed_parameters_and_the_constructor_shows_its_limits():
    import inspect
    import typing

    for cls in (LifetimeClient, AsyncLifetimeClient):
        init = inspect.signature(cls.__init__).parameters
        for name in ("timeout", "connect_timeout", "retries", "backoff", "max_backoff", "token"):
            assert name in init and init[name].kind is inspect.Parameter.KEYWORD_ONLY, name
        for name in ("survival", "deferred_death", "expectation", "moments", "quantiles",
                     "life_table", "life_table_csv", "present_values"):
            method = getattr(cls, name)
            parameters = inspect.signature(method).parameters
            hints = typing.get_type_hints(method)
            named = [p for p in parameters.values()
                     if p.name != "self" and p.kind is not inspect.Parameter.VAR_KEYWORD]
            assert named and all(p.name in hints for p in named), (cls, name)
            # a catch-all for unknown names is typed Never: a type checker refuses any
            assert hints["unknown"] is typing.Never


def test_a_present_values_request_off_the_schema_is_refused_before_sending(service):
    # present values share the server's request Struct: an unknown benefit type never leaves
    with LifetimeClient(service.url) as client:
        with pytest.raises(LifetimeServiceError) as caught:
            client.present_values(
                basis="standard-ultimate", lives=[{"age": 60}], interest={"rate": 0.03},
                benefits=[{"type": "tontine"}],
            )
        answer = client.present_values(
            basis="standard-ultimate", lives=[{"age": 60}], interest={"rate": 0.05},
            benefits=[{"type": "life-annuity", "timing": "advance"}],
        )
    assert caught.value.status is None and not caught.value.sent
    assert caught.value.errors and caught.value.errors[0][0].startswith("$.benefits")
    # ä_60 at 5 % on the Standard Ultimate Life Table: 14.9041 (Dickson, Hardy and Waters;
    # quoted from memory)
    assert round(answer.results[0].benefits[0].value, 4) == 14.9041


def test_the_async_client(service):
    async def run():
        async with AsyncLifetimeClient(service.url) as client:
            ready = await client.ready()
            answers = await asyncio.gather(
                *(client.expectation(basis="standard-ultimate", lives=[{"age": a}]) for a in (40, 60))
            )
            with pytest.raises(LifetimeServiceError) as caught:
                await client.survival(basis="no-such-basis", lives=[{"age": 60}], t=[1])
            return ready, answers, caught.value

    ready, answers, error = asyncio.run(run())
    assert ready.status == "ready"
    assert answers[0].results[0].complete > answers[1].results[0].complete > 0
    assert error.status == 404


def test_lives_by_date_through_both_clients(service):
    # born 1979-04-17, valued 2024-10-17: 45 completed years and 183 of the 365 days to the
    # next birthday (hand computation); last birthday, 45
    lives = [{"date_of_birth": "1979-04-17"}]
    dated = {"calculation_date": date(2024, 10, 17)}
    with LifetimeClient(service.url) as client:
        exact = client.expectation(basis="standard-ultimate", lives=lives, **dated)
        whole = client.survival(basis="standard-ultimate", lives=lives, t=[1], **dated,
                                age_convention="last-birthday")
        values = client.present_values(
            basis="standard-ultimate", lives=lives, interest={"rate": 0.05},
            benefits=[{"type": "life-annuity"}], **dated, age_convention="next-birthday")
        with pytest.raises(LifetimeServiceError) as caught:  # refused before sending
            client.expectation(basis="standard-ultimate", lives=lives, **dated,
                               age_convention="age-nearest")  # type: ignore[arg-type]

    async def run():
        async with AsyncLifetimeClient(service.url) as client:
            return await client.cash_flows(
                basis="standard-ultimate", lives=lives, interest={"rate": 0.05},
                benefits=[{"type": "life-insurance", "term": 2}], calculation_date="2024-10-17",
                age_convention="nearest-birthday")

    flows = asyncio.run(run())
    assert exact.results[0].age == 45 + 183 / 365 and exact.age_convention == "exact"
    assert exact.calculation_date == date(2024, 10, 17)
    assert whole.results[0].age == 45.0 and whole.age_convention == "last-birthday"
    assert values.results[0].age == 46.0 and flows.results[0].age == 46.0
    assert not caught.value.sent and caught.value.errors[0][0] == "$.age_convention"


def test_a_bearer_token_is_sent(tmp_path):
    token = "an-invented-token-for-tests-only"
    with LocalService(log_path=tmp_path / "service.log", LIFETIME_AUTH_TOKEN=token) as running:
        with LifetimeClient(running.url) as anonymous:
            with pytest.raises(LifetimeServiceError) as caught:
                anonymous.bases()
        with LifetimeClient(running.url, token=token) as client:
            assert client.bases().bases
    assert caught.value.status == 401


def test_retries_reach_a_service_that_comes_up_late(tmp_path):
    port = free_port()
    url = f"http://127.0.0.1:{port}"
    with LifetimeClient(url, retries=0) as impatient:
        with pytest.raises(LifetimeServiceError) as refused:
            impatient.health()
    assert refused.value.status is None and refused.value.type == "client/unreachable"

    started: list = []
    starter = threading.Timer(1.0, lambda: started.append(spawn(port)))
    starter.start()
    try:
        # at most 40 retries, waiting at most 0.5 s each: bounded at about 20 s
        with LifetimeClient(url, retries=40, backoff=0.05, max_backoff=0.5) as client:
            begun = time.monotonic()
            assert client.health().status == "ok"
            waited = time.monotonic() - begun
    finally:
        starter.join()
        for process in started:
            stop(process)
    assert started and waited >= 1.0


def test_retries_are_bounded_and_back_off():
    url = f"http://127.0.0.1:{free_port()}"
    with LifetimeClient(url, retries=3, backoff=0.1, max_backoff=0.15) as client:
        begun = time.monotonic()
        with pytest.raises(LifetimeServiceError) as caught:
            client.health()
        waited = time.monotonic() - begun
    assert "after 4 attempt(s)" in caught.value.detail
    assert 0.1 + 0.15 + 0.15 <= waited < 10


def _counting(answers):
    """A transport that answers (or raises) from ``answers`` in turn and counts the calls."""
    calls = []

    def handle(request: httpx.Request) -> httpx.Response:
        calls.append(request)
        answer = answers[min(len(calls), len(answers)) - 1]
        if isinstance(answer, Exception):
            raise answer
        return answer

    return httpx.MockTransport(handle), calls


def test_an_answer_is_never_retried_but_a_refused_connection_is():
    problem = httpx.Response(
        422,
        headers={"content-type": "application/problem+json"},
        json={"type": "/problems/outside-domain", "title": "Outside the domain", "status": 422,
              "detail": "d", "errors": [{"field": "$.lives[0].age", "message": "m"}]},
    )
    transport, calls = _counting([problem])
    with LifetimeClient("http://127.0.0.1:1", transport=transport, backoff=0) as client:
        with pytest.raises(LifetimeServiceError) as caught:
            client.expectation(basis="standard-ultimate", lives=[{"age": 60}])
    assert len(calls) == 1
    assert caught.value.errors == [("$.lives[0].age", "m")]

    refused = httpx.ConnectError("refused")
    transport, calls = _counting([refused, refused, httpx.Response(200, json={"status": "ok"})])
    with LifetimeClient("http://127.0.0.1:1", transport=transport, backoff=0) as client:
        assert client.health().status == "ok"
    assert len(calls) == 3

    transport, calls = _counting([httpx.ReadTimeout("slow")])
    with LifetimeClient("http://127.0.0.1:1", transport=transport, backoff=0) as client:
        with pytest.raises(LifetimeServiceError) as timed_out:
            client.health()
    assert len(calls) == 1 and timed_out.value.type == "client/transport-error"


def test_an_answer_of_another_shape_fails_loudly():
    transport, _ = _counting([httpx.Response(200, json={"basis": {}, "results": []})])
    with LifetimeClient("http://127.0.0.1:1", transport=transport) as client:
        with pytest.raises(LifetimeServiceError) as caught:
            client.expectation(basis="standard-ultimate", lives=[{"age": 60}])
    assert caught.value.type == "client/unexpected-answer"
    assert "ExpectationResponse" in caught.value.detail


def test_the_readme_client_example_runs(service, capsys):
    """The README's client example, run as written against a started server."""
    import re
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text()
    code = re.search(r"```python\n(.*?)```", readme, re.S).group(1)
    exec(compile(code.replace("http://127.0.0.1:8000", service.url), "README.md", "exec"), {})
    printed = capsys.readouterr().out.splitlines()
    assert printed[0].startswith("sha256:")
    assert printed[1].startswith("65.0 ") and printed[2].startswith("70.0 ")
    assert printed[-1].startswith("422 [('$.basis.A', 'A must be greater than")


def test_an_earlier_version_of_a_stored_basis_by_fingerprint(service):
    with LifetimeClient(service.url) as client:
        current = client.basis("thistlemoor-2024-annuitants")
        same = client.basis_version("thistlemoor-2024-annuitants", current.fingerprint)
        with pytest.raises(LifetimeServiceError) as caught:
            client.basis_version("thistlemoor-2024-annuitants", "sha256:" + "0" * 64)
    assert same == current
    assert caught.value.status == 404 and caught.value.type == "/problems/unknown-basis-version"


def test_the_client_offers_the_service_s_age_conventions():
    import typing

    from service.client import AgeConventionArgument
    from service.selection import AGE_CONVENTIONS

    assert set(typing.get_args(AgeConventionArgument)) == set(AGE_CONVENTIONS)
