"""Build hook: copy the top-level templates/ folder into the package, so a wheel carries its templates.

Everything else about the package is declared in pyproject.toml.
"""

import shutil
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py


class BuildWithTemplates(build_py):
    def run(self):
        super().run()
        source = Path(__file__).parent / "templates"
        target = Path(self.build_lib) / "labelstudy" / "templates"
        if source.is_dir() and not self.editable_mode:
            if target.exists():
                shutil.rmtree(target)
            shutil.copytree(source, target)


setup(cmdclass={"build_py": BuildWithTemplates})
