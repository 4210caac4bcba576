"""Packaging glue that pyproject.toml cannot express: the repository's `rules/` folder
(the built-in limit packs) ships inside the wheel as the package `checker.rules`."""

from setuptools import find_packages, setup

setup(
    packages=find_packages(include=["checker", "checker.*"]) + ["checker.rules"],
    package_dir={"checker.rules": "rules"},
)
