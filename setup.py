"""Package discovery that pyproject.toml alone cannot say: the source folder ``configs/``
installs as the package ``sweepd_configs`` (with its YAML, Markdown and JSON files), next
to every package found under acquire/, drivers/ and simulators/. All other metadata is in
pyproject.toml.
"""

from setuptools import find_packages, setup

setup(
    packages=[*find_packages(include=["acquire*", "drivers*", "simulators*"]), "sweepd_configs"],
    package_dir={"sweepd_configs": "configs"},
)
