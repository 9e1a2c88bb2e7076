"""The project's own fuzzer in the default run: seeded, bounded in count and time.

Beside the schemathesis run (test_contract_fuzzing.py), which explores the schema, this one
aims at the families the second robustness round found by hand (see ``own_fuzzer``). The seed
is fixed so that a failure reproduces; the case that failed is printed with the reason.
"""

from __future__ import annotations

import collections
import time

from .own_fuzzer import FAMILIES, cases, check

SEED = 20261202
COUNT = 500  # 100 per family; about 6 s in process
TIME_LIMIT_S = 60.0


def test_the_own_fuzzer_finds_nothing(client):
    started = time.monotonic()
    seen: collections.Counter = collections.Counter()
    failures = []
    for case in cases(SEED, COUNT):
        headers = {"content-type": "application/json", **case.headers}
        r = client.post(case.path, content=case.body, headers=headers)
        seen[case.family] += 1
        why = check(case, r.status_code, r.headers.get("content-type", ""), r.text)
        if why:
            failures.append(f"{case.family}: {case.description}: {why}: {r.text[:300]}")
        if time.monotonic() - started > TIME_LIMIT_S:
            break
    assert not failures, "\n".join(failures[:20])
    assert set(seen) == set(FAMILIES)
    assert sum(seen.values()) == COUNT, f"stopped by the time limit after {dict(seen)}"
