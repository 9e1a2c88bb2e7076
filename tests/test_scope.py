"""The README's first paragraph and the OpenAPI description name the whole scope of the
service, and both keep the usual caution (common practice for pricing tools)."""

from __future__ import annotations

from pathlib import Path

import pytest

from service.api.openapi import CAUTION

README = (Path(__file__).resolve().parents[1] / "README.md").read_text()
FIRST_PARAGRAPH = README.split("\n\n")[1].replace("\n", " ")

SCOPE = ["survival", "expectations of life", "quantiles", "life tables", "present values",
         "annuities", "insurances", "endowments", "net level premiums", "ratings",
         "improvement", "joint-life", "last-survivor"]


@pytest.mark.parametrize("text", [FIRST_PARAGRAPH, CAUTION.replace("\n", " ")],
                         ids=["README", "OpenAPI"])
def test_the_whole_scope_is_named(text):
    missing = [word for word in SCOPE if word not in text]
    assert not missing, missing


def test_the_caution_is_kept():
    assert "not actuarial advice" in README and "responsible actuary" in README
    assert "not actuarial advice" in CAUTION and "responsible actuary" in CAUTION
    assert "regulation" in CAUTION
