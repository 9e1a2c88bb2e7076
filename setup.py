"""Only a build hook; everything else is in pyproject.toml.

``build_py`` records the commit the package is built from (``service/build.json``, see
``service/version.py``), so a wheel or an image built from a checkout reports it in
``service_version`` without git at run time. A build without git leaves what is there.
"""

import importlib.util
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py


class build_py_with_record(build_py):
    def run(self):
        super().run()
        if getattr(self, "editable_mode", False):
            return  # an editable install asks the checkout at run time
        spec = importlib.util.spec_from_file_location(
            "_service_version", Path(__file__).parent / "service" / "version.py"
        )
        version = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(version)
        if version.checkout_commit(Path(__file__).parent) is not None:
            version.record(Path(self.build_lib) / "service" / "build.json", None)


setup(cmdclass={"build_py": build_py_with_record})
