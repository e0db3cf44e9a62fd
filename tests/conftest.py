import os
import pathlib
import sys

import pytest
from astropy.utils import iers

os.environ.setdefault("MPLBACKEND", "Agg")
# No network at run time: astropy must never try to fetch IERS tables during the tests.
iers.conf.auto_download = False
sys.path.insert(0, str(pathlib.Path(__file__).parent))

ROOT = pathlib.Path(__file__).resolve().parent.parent


@pytest.fixture
def demo_catalogue_path():
    return ROOT / "target_lists" / "demo.csv"


@pytest.fixture
def write_file(tmp_path):
    """Write text to a file in the test's temporary folder and return its path."""
    def write(name, text, mode="w"):
        path = tmp_path / name
        if mode == "wb":
            path.write_bytes(text)
        else:
            path.write_text(text, encoding="utf-8")
        return path
    return write


@pytest.fixture(scope="session")
def demo_report(tmp_path_factory):
    """The report of one ``cwlimits demo`` run, shared by the tests that inspect it."""
    from cwlimits.cli.app import main

    out = tmp_path_factory.mktemp("demo") / "report"
    assert main(["-q", "demo", "--out-dir", str(out)]) == 0
    return out
