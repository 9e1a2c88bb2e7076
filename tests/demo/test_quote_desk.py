"""The demo end to end: the quick form of the README command, into a temporary folder."""

from __future__ import annotations

import csv
import json
import struct
import subprocess
import sys
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import pytest

from demo import quote_desk
from service.bases import definitions as d
from service.launch import service_environment

pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "demo"


def _png_size(path) -> tuple[int, int]:
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", f"{path.name} is not a PNG"
    return struct.unpack(">II", data[16:24])


def test_every_applicant_and_the_insurer_are_marked_invented():
    text = (DEMO / "applicants.csv").read_text()
    assert text.startswith("# INVENTED DATA. Thistlemoor Mutual is a fictional insurer")
    rows = list(csv.DictReader(line for line in text.splitlines() if not line.startswith("#")))
    assert len(rows) >= 24 and all(row["invented"] == "yes" for row in rows)
    assert {row["product"] for row in rows} == {"term", "annuity", "last-survivor-annuity"}
    assert "INVENTED" in (DEMO / "README.md").read_text()


def test_the_quick_demo_runs_end_to_end(tmp_path):
    result = subprocess.run(
        [sys.executable, "-m", "demo.quote_desk", "--quick", "--out", str(tmp_path)],
        cwd=ROOT, env=service_environment(MPLBACKEND="Agg"),
        capture_output=True, text=True, timeout=300,
    )
    assert result.returncode == 0, result.stdout + result.stderr
    assert "priced 8 applicants" in result.stdout

    report = (tmp_path / "report.md").read_text()
    summary = json.loads((tmp_path / "quotes.json").read_text())
    assert summary["invented"] is True and summary["applicants"] == 8
    for name in ("survival_curves.png", "curtate_distribution.png", "rating_and_improvement.png"):
        path = tmp_path / name
        assert path.stat().st_size > 20_000, f"{name} looks empty"
        width, height = _png_size(path)
        assert width >= 600 and height >= 400
        assert f"({name})" in report
    assert summary["charts"] == [
        "survival_curves.png", "curtate_distribution.png", "rating_and_improvement.png"
    ]

    quotes = summary["quotes"]
    assert {q["product"] for q in quotes} == {"term", "annuity", "last-survivor-annuity"}
    for q in quotes:
        assert q["id"] in report
        assert q["fingerprint"].startswith("sha256:") and len(q["fingerprint"]) == 71
        assert q["fingerprint"] in report
        assert q["complete_expectation"] > 0
        p = [point["p"] for point in q["survival"]]
        assert p and all(0 < b <= a <= 1 for a, b in zip([1.0] + p, p))
        if q["product"] == "term":
            (cover,) = q["values"].values()
            assert 0 < cover["per_unit"] < 1 and cover["yearly_premium"] > 0
            # the sum assured is paid only on death within the term
            assert cover["per_unit"] < 1 - p[-1]
        else:
            annuity = q["values"]["annuity" if q["product"] == "annuity" else "while either lives"]
            assert 1 < annuity["per_unit"] < 40 and annuity["standard_deviation"] > 0
        if q["product"] == "last-survivor-annuity":
            assert q["values"]["while both live"]["per_unit"] < q["values"]["while either lives"]["per_unit"]
    # an annuity paid while either of a couple lives is a last-survivor annuity, and each
    # value column says which annuity it values (common practice in pricing reports)
    assert "## Last-survivor annuities (couples)" in report and "Joint-life annuities" not in report
    for heading in (quote_desk.ANNUITY_VALUE_COLUMN, quote_desk.LAST_SURVIVOR_COLUMN,
                    quote_desk.JOINT_LIFE_COLUMN):
        assert f"| {heading} |" in report
    assert "5 years certain then for life" in quote_desk.ANNUITY_VALUE_COLUMN
    # stored bases answer with their ids, rated ones inline with their own fingerprints
    by_basis = {q["basis"]: q for q in quotes}
    assert by_basis["thistlemoor-2024-female"]["basis_id"] == "thistlemoor-2024-female"
    assert any(q["basis_id"] is None for q in quotes)


class _OtherShape(BaseHTTPRequestHandler):
    """A stand-in service whose calculation answers have lost their results."""

    def _answer(self, body: dict) -> None:
        data = json.dumps(body).encode()
        self.send_response(200)
        self.send_header("Content-Type", "application/json")
        self.send_header("Content-Length", str(len(data)))
        self.end_headers()
        self.wfile.write(data)

    def do_GET(self):  # noqa: N802
        if self.path == "/ready":
            self._answer({"status": "ready", "stored_bases": 0})
        else:
            self._answer({"bases": []})

    def do_POST(self):  # noqa: N802
        self.rfile.read(int(self.headers.get("Content-Length", 0)))
        self._answer({"basis": {"id": None, "fingerprint": "sha256:" + "0" * 64},
                      "service_version": "0", "results": [],
                      "calculation_fingerprint": "sha256:" + "0" * 64})

    def log_message(self, *args):
        pass


def test_the_demo_fails_loudly_when_answers_change_shape(tmp_path):
    server = ThreadingHTTPServer(("127.0.0.1", 0), _OtherShape)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        result = subprocess.run(
            [sys.executable, "-m", "demo.quote_desk", "--quick", "--out", str(tmp_path),
             "--url", f"http://127.0.0.1:{server.server_address[1]}"],
            cwd=ROOT, env=service_environment(MPLBACKEND="Agg"),
            capture_output=True, text=True, timeout=120,
        )
    finally:
        server.shutdown()
        thread.join(timeout=10)
    assert result.returncode == 1
    assert "FAILED: AnswerShapeError" in result.stderr
    assert "0 results for" in result.stderr
    assert not (tmp_path / "report.md").exists()


def test_chart_titles_never_break_inside_brackets():
    couple = d.LastSurvivor(members=[
        d.Adjusted(base="thistlemoor-2024-annuitants", age_shift=-3, force_multiplier=1.5),
        "thistlemoor-2024-annuitants",
    ])
    lines = quote_desk.title_lines("basis: ", couple)
    assert lines[0] == "basis: last survivor of 2 lives:"
    for line in lines + quote_desk.wrap_outside_brackets("a " * 40 + "(b c d e f g h)", 20):
        assert line.count("(") == line.count(")") and line.count("[") == line.count("]"), line
    assert max(len(x) for x in quote_desk.wrap_outside_brackets("word " * 60, 30)) <= 30


def test_an_axis_ends_at_the_last_visible_value():
    assert quote_desk.last_visible([0, 1, 2, 3], [1.0, 0.5, 1e-5, 0.0], 1e-3) == 1
    assert quote_desk.last_visible([0, 1], [float("nan"), 0.0], 1e-3) == 1  # nothing visible
