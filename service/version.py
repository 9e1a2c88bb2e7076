"""The service's version, reported in every calculation response as ``service_version``.

Kept equal to ``project.version`` in pyproject.toml (a test checks it), so that the running
service does not depend on the package being installed to know its own version.
"""

__version__ = "0.1.0"
