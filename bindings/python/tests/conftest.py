"""Shared fixtures: the repository's examples and the `headroom` binary the
package is compared with (HEADROOM_BIN, else the workspace's build)."""

import json
import os
import pathlib
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[3]


def _binary():
    env = os.environ.get("HEADROOM_BIN")
    if env:
        return pathlib.Path(env)
    for profile in ("release", "debug"):
        p = ROOT / "target" / profile / "headroom"
        if p.exists():
            return p
    raise RuntimeError("no headroom binary: run `cargo build -p headroom-cli` or set HEADROOM_BIN")


@pytest.fixture(scope="session")
def root():
    return ROOT


@pytest.fixture(scope="session")
def cli():
    """Run the binary; (exit code, stdout, the last stderr line)."""
    exe = _binary()

    def run(*argv, cwd=ROOT):
        p = subprocess.run([str(exe), *map(str, argv)], cwd=cwd, capture_output=True, text=True)
        last = p.stderr.strip().splitlines()[-1] if p.stderr.strip() else ""
        return p.returncode, p.stdout, last

    return run


@pytest.fixture(scope="session")
def cli_json(cli):
    """The binary's JSON output; fails the test with its message otherwise."""

    def run(*argv, cwd=ROOT):
        code, out, err = cli(*argv, "--format", "json", cwd=cwd)
        assert code == 0, err
        return json.loads(out)

    return run


@pytest.fixture(autouse=True)
def _at_root(monkeypatch):
    # The examples are named relative to the repository, as in the README.
    monkeypatch.chdir(ROOT)
