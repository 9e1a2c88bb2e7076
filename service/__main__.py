"""``python -m service``: start the server from settings (command line over environment).

The stored bases are loaded and compiled before the server starts, so a bad basis file stops
the start at once with a message naming the file and the field (exit status 1); a bad setting
stops it with a message naming the option or variable (exit status 2).
"""

from __future__ import annotations

import logging
import os
import shutil
import signal
import sys
import tempfile
from collections.abc import Sequence
from pathlib import Path

PROGRAM = "lifetime-service"


def main(argv: Sequence[str] | None = None) -> int:
    from service.settings import SettingsError, load, to_environment

    try:
        settings = load(argv)
    except SettingsError as exc:
        print(f"{PROGRAM}: {exc}", file=sys.stderr)
        return 2

    try:
        import uvicorn

        from service.api.app import create_app
        from service.api.protocol import configure as configure_protocol
    except ImportError as exc:  # the client alone is installed, without the server extra
        print(
            f"{PROGRAM}: cannot start: {exc.name} is not installed; the service needs the "
            "server extra: pip install 'lifetime-service[server]' (or '.[server]' in a checkout)",
            file=sys.stderr,
        )
        return 2
    from service.api.observability import MULTIPROCESS_DIR_VARIABLE, configure_logging
    from service.bases.catalogue import BasisFileError, Catalogue

    configure_logging(settings.log_level)
    folder = Path(settings.bases_dir) if settings.bases_dir else None
    catalogue = Catalogue(folder, settings.cache_size, settings.cache_bytes)
    try:
        catalogue.load()
    except BasisFileError as exc:
        print(f"{PROGRAM}: cannot start: stored basis {exc}", file=sys.stderr)
        return 1

    loop = _event_loop()
    logging.getLogger("service").info(
        "serving with uvicorn %s, the %s parser and the %s event loop, %d worker%s",
        uvicorn.__version__, settings.http, loop, settings.workers,
        "" if settings.workers == 1 else "s",
    )
    common = dict(
        host=settings.host,
        port=settings.port,
        log_level=settings.log_level,
        log_config=None,
        access_log=False,  # the service writes its own access log lines
        server_header=False,
        proxy_headers=False,
        loop=loop,
        **configure_protocol(settings.max_header_bytes, settings.request_timeout, settings.http),
    )
    # uvicorn stops gracefully on SIGTERM (in-flight requests finish), then restores the
    # handler it found and raises the signal again: this handler makes that a clean exit 0
    signal.signal(signal.SIGTERM, _exit_cleanly)
    if settings.workers == 1:
        uvicorn.run(create_app(settings, catalogue), **common)
        return 0
    # each worker process builds its own application from the same settings, and writes its
    # metrics into files of one folder, which /metrics reads whichever worker answers it
    try:
        metrics_dir = _metrics_folder()
    except OSError as exc:
        print(f"{PROGRAM}: cannot start {settings.workers} workers: no folder for their "
              f"metrics ({exc}); set TMPDIR or {MULTIPROCESS_DIR_VARIABLE} to a writable "
              "folder", file=sys.stderr)
        return 1
    os.environ.update(to_environment(settings))
    os.environ[MULTIPROCESS_DIR_VARIABLE] = str(metrics_dir)
    try:
        uvicorn.run(
            "service.api.app:create_app_from_environment",
            factory=True,
            workers=settings.workers,
            **common,
        )
    finally:
        shutil.rmtree(metrics_dir, ignore_errors=True)
    return 0


def _metrics_folder() -> Path:
    """A new, empty folder for the workers' metric files (the Prometheus client's
    multiprocess mode), removed when the service stops."""
    return Path(tempfile.mkdtemp(prefix="lifetime-service-metrics-"))


def _event_loop() -> str:
    """uvloop (libuv, in C) where it is installed, as the server extra does; asyncio's own
    event loop elsewhere (uvloop does not run on Windows)."""
    try:
        import uvloop  # noqa: F401
    except ImportError:
        return "asyncio"
    return "uvloop"


def _exit_cleanly(signum, frame) -> None:
    sys.exit(0)


if __name__ == "__main__":
    sys.exit(main())
