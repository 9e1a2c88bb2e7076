"""Lives by date of birth against the same lives by age, in one run: figures and a ratio,
never a timed failure.

Run with:  python -m pytest tests/benchmarks/test_dates_speed.py -s

10,000 lives on /v1/survival (one t), sent by date of birth with a calculation_date, and the
same lives sent by the exact ages those dates give, alternately, through the test client (body
decoding, the lives' step, the computation and the answer's encoding all counted); the
median of each.
"""

from __future__ import annotations

import json
import time
from datetime import date, timedelta

import numpy as np
from litestar.testing import TestClient

from service.ages import day_number, years_between
from service.api.app import create_app
from service.settings import Settings

N = 10_000
ROUNDS = 15


def test_ten_thousand_lives_by_date_against_by_age():
    born = [date(1940, 1, 1) + timedelta(days=2 * k + k % 5) for k in range(N)]
    on = date(2024, 10, 17)
    ages = years_between(np.array([day_number(d) for d in born]), day_number(on), "exact")
    bodies = {
        "by age": {"basis": "standard-ultimate", "lives": [{"age": a} for a in ages.tolist()],
                   "t": [1]},
        "by date": {"basis": "standard-ultimate", "calculation_date": on.isoformat(),
                    "lives": [{"date_of_birth": d.isoformat()} for d in born], "t": [1]},
    }
    encoded = {name: json.dumps(body).encode() for name, body in bodies.items()}
    times: dict[str, list[float]] = {name: [] for name in bodies}
    with TestClient(create_app(Settings())) as client:
        for _ in range(ROUNDS):
            for name, body in encoded.items():
                start = time.perf_counter()
                answer = client.post("/v1/survival", content=body,
                                     headers={"Content-Type": "application/json"})
                times[name].append(time.perf_counter() - start)
                assert answer.status_code == 200
        answers = [client.post("/v1/survival", content=b, headers={
            "Content-Type": "application/json"}).json()["results"] for b in encoded.values()]
    assert answers[0] == answers[1]  # the same lives, the same numbers
    median = {name: float(np.median(t)) * 1000 for name, t in times.items()}
    print(f"\n{N} lives, /v1/survival: by age {median['by age']:.1f} ms, by date "
          f"{median['by date']:.1f} ms (median of {ROUNDS}); ratio "
          f"{median['by date'] / median['by age']:.2f}")
