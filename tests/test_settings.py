"""Settings from the environment and the command line."""

from __future__ import annotations

import pytest

from service.settings import Settings, SettingsError, load, to_environment


def test_defaults():
    s = load([], {})
    assert s == Settings()
    assert (s.host, s.port, s.workers) == ("127.0.0.1", 8000, 1)
    assert (s.max_lives, s.max_durations, s.max_body_bytes, s.cache_size) == (10000, 1000, 1048576, 256)
    assert s.bases_dir is None and s.log_level == "info"


def test_environment_then_command_line():
    env = {"LIFETIME_PORT": "8100", "LIFETIME_MAX_LIVES": "50", "LIFETIME_LOG_LEVEL": "DEBUG",
           "OTHER": "x"}
    s = load([], env)
    assert (s.port, s.max_lives, s.log_level) == (8100, 50, "debug")
    s = load(["--port", "8200", "--cache-size", "3"], env)
    assert (s.port, s.max_lives, s.cache_size) == (8200, 50, 3)


def test_bad_values_name_their_source():
    with pytest.raises(SettingsError, match="LIFETIME_PORT"):
        load([], {"LIFETIME_PORT": "eighty"})
    with pytest.raises(SettingsError, match="--max-lives"):
        load(["--max-lives", "0"], {})
    with pytest.raises(SettingsError, match="LIFETIME_LOG_LEVEL"):
        load([], {"LIFETIME_LOG_LEVEL": "loud"})


def test_unknown_option_is_refused():
    with pytest.raises(SystemExit):
        load(["--colour", "red"], {})


def test_round_trip_through_environment():
    s = load(["--port", "9001", "--bases-dir", "somewhere", "--workers", "2"], {})
    assert load([], to_environment(s)) == s
