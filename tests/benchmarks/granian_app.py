"""The service's application for granian (measured beside uvicorn in test_load.py): the
settings from ``LIFETIME_*`` variables and the same JSON logging ``python -m service`` sets
up, so both servers write the same access-log line per request."""

from __future__ import annotations

from service.api.app import LifetimeApp, create_app_from_environment
from service.api.observability import configure_logging
from service.settings import from_environment


def create() -> LifetimeApp:
    configure_logging(from_environment().log_level)
    return create_app_from_environment()
