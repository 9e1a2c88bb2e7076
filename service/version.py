"""The service's version, and ``service_version()``: the version that identifies the build.

``__version__`` is kept equal to ``project.version`` in pyproject.toml (a test checks it), so
the running service does not depend on the package's metadata to know its own version.

``service_version()`` adds the commit the code was built from, as a local version label:
``0.1.0+g3ff4c88a1b2c`` (12 hex digits of the commit; ``.dirty`` after it when files tracked by
git had uncommitted changes). The commit comes from, in this order:

1. ``service/build.json``, written at build time by ``python -m service.version --record``
   (the Dockerfile runs it with the commit given as the build argument ``SOURCE_COMMIT``;
   ``pip install .`` from a checkout runs it through setup.py), so an installed package or a
   container carries its commit without git or a checkout;
2. the git checkout the code runs from (an editable install, or ``python -m service`` in a
   clone), asked once at start-up;
3. nothing: then the version alone.
"""

from __future__ import annotations

import argparse
import functools
import json
import re
import subprocess
import sys
from pathlib import Path

__version__ = "0.1.0"

PACKAGE = Path(__file__).resolve().parent
BUILD_FILE = PACKAGE / "build.json"
_COMMIT = re.compile(r"^[0-9a-f]{7,64}$")


def _git(root: Path, *args: str) -> str | None:
    try:
        done = subprocess.run(
            ["git", "-C", str(root), *args], capture_output=True, text=True, timeout=10
        )
    except (OSError, subprocess.SubprocessError):
        return None
    return done.stdout.strip() if done.returncode == 0 else None


def checkout_commit(root: Path = PACKAGE.parent) -> tuple[str, bool] | None:
    """(commit, dirty) of the git checkout at ``root``, or None when it is not one."""
    if not (root / ".git").exists():
        return None
    commit = _git(root, "rev-parse", "HEAD")
    if not commit or not _COMMIT.match(commit):
        return None
    changes = _git(root, "status", "--porcelain", "--untracked-files=no")
    return commit, bool(changes)


def recorded_commit(path: Path = BUILD_FILE) -> tuple[str, bool] | None:
    """(commit, dirty) recorded at build time, or None."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    commit = data.get("commit") if isinstance(data, dict) else None
    if not isinstance(commit, str) or not _COMMIT.match(commit):
        return None
    return commit, bool(data.get("dirty"))


def label(version: str, found: tuple[str, bool] | None) -> str:
    if found is None:
        return version
    commit, dirty = found
    return f"{version}+g{commit[:12]}" + (".dirty" if dirty else "")


@functools.cache
def service_version() -> str:
    """The version that identifies this build (see the module docstring)."""
    return label(__version__, recorded_commit() or checkout_commit())


def record(target: Path, commit: str | None) -> dict:
    """Write the build record: the given commit, else the checkout's (dirty or not)."""
    if commit:
        commit = commit.strip().lower()
        if not _COMMIT.match(commit):
            raise SystemExit(f"--commit must be a git commit in hex (got {commit!r})")
        found: tuple[str, bool] | None = (commit, False)
    else:
        found = checkout_commit()
    data = {"version": __version__, "commit": found[0] if found else None,
            "dirty": found[1] if found else False}
    target.write_text(json.dumps(data) + "\n", encoding="utf-8")
    return data


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description="Print the service version, or record the build.")
    parser.add_argument("--record", action="store_true", help="write service/build.json")
    parser.add_argument("--commit", default="", help="the commit to record (default: git's)")
    args = parser.parse_args(argv)
    if args.record:
        data = record(BUILD_FILE, args.commit or None)
        print(label(__version__, (data["commit"], data["dirty"]) if data["commit"] else None))
    else:
        print(service_version())


if __name__ == "__main__":
    main(sys.argv[1:])
