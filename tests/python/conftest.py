# Shared fixtures of the pytest suite of the Python module (run by ctest as python_pytest, with
# PYTHONPATH=<build>/python and STREAKWRIGHT_CLI=<the streakwright executable>).
import os
import subprocess

import pytest

import streakwright  # noqa: F401  (fails the whole suite early when the module is missing)


def cli_path():
    path = os.environ.get("STREAKWRIGHT_CLI", "")
    if not path or not os.path.exists(path):
        pytest.skip("STREAKWRIGHT_CLI is not set to the streakwright executable (run through ctest)")
    return path


def run_cli(*args):
    """Runs the CLI; returns the CompletedProcess (text output)."""
    return subprocess.run([cli_path(), *args], capture_output=True, text=True, timeout=240)


@pytest.fixture(scope="session")
def archive(tmp_path_factory):
    """Scans written by the CLI's simulate: a streaking scan, a RABBITT scan, an XUV-only scan."""
    root = tmp_path_factory.mktemp("scans")
    out = {}
    for preset, seed in (("neon-150as", 3), ("argon-rabbitt", 4), ("neon-xuv-only", 5)):
        r = run_cli("simulate", "--preset", preset, "--out", str(root), "--name", preset,
                    "--seed", str(seed), "--quiet")
        assert r.returncode == 0, r.stderr
        out[preset] = str(root / (preset + ".json"))
    return out
