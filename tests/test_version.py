"""The version is written once (roundscore.__version__); the package metadata and the CLI read it."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

import importlib.metadata
import tomllib
from pathlib import Path

import pytest

import roundscore
from roundscore import cli

PYPROJECT = Path(__file__).resolve().parents[1] / "pyproject.toml"


def test_pyproject_takes_the_version_from_the_module():
    meta = tomllib.loads(PYPROJECT.read_text(encoding="utf-8"))
    assert "version" not in meta["project"]  # no second copy to forget
    assert "version" in meta["project"]["dynamic"]
    assert meta["tool"]["setuptools"]["dynamic"]["version"] == {"attr": "roundscore.__version__"}


def test_installed_metadata_carries_the_module_version():
    # Fails after a version change until the package is installed again (pip install -e .).
    assert importlib.metadata.version("roundscore") == roundscore.__version__


def test_cli_prints_the_version(capsys):
    with pytest.raises(SystemExit) as done:
        cli.main(["--version"])
    assert done.value.code == 0
    assert capsys.readouterr().out.strip() == f"roundscore {roundscore.__version__}"
