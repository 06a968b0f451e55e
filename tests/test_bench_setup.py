"""`make test` sets up what its tests need: headless Chromium is installed with apt-get when it is
missing and the user can (root, apt-get there), otherwise make stops with one line saying what
to install; a second call installs nothing.

The Makefile's `chromium` step runs with PATH set to a folder of stand-ins (`id`, `apt-get`,
`chromium`), so no package is really installed and the answer does not depend on this machine.
"""
from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest

from tests.test_bench_helpers import REPO_ROOT

MAKE = shutil.which("make")
pytestmark = pytest.mark.skipif(MAKE is None, reason="make is not installed")


def _script(path: Path, body: str) -> None:
    path.write_text("#!/bin/sh\n" + body)
    path.chmod(0o755)


def _bin(tmp_path: Path, uid: int, apt: bool, chromium: bool) -> Path:
    b = tmp_path / "bin"
    b.mkdir()
    _script(b / "id", f"echo {uid}\n")
    if apt:  # records its calls; `install` puts a chromium on the PATH, as the real package does
        _script(b / "apt-get", f'echo "$*" >> {tmp_path}/apt.log\n'
                               f'case "$*" in *install*) printf "#!/bin/sh\\n" > {b}/chromium; '
                               f'/bin/chmod +x {b}/chromium;; esac\n')
    if chromium:
        _script(b / "chromium", "exit 0\n")
    return b


def _make(b: Path) -> subprocess.CompletedProcess:
    return subprocess.run([MAKE, "--no-print-directory", "-C", str(REPO_ROOT), "chromium"],
                          env={"PATH": str(b), "HOME": str(b)}, capture_output=True, text=True, timeout=60)


def _apt_calls(tmp_path: Path) -> list[str]:
    log = tmp_path / "apt.log"
    return log.read_text().splitlines() if log.exists() else []


def test_present_chromium_installs_nothing(tmp_path):
    b = _bin(tmp_path, uid=0, apt=True, chromium=True)
    run = _make(b)
    assert run.returncode == 0, run.stderr
    assert _apt_calls(tmp_path) == []


def test_missing_chromium_is_installed_once_as_root(tmp_path):
    b = _bin(tmp_path, uid=0, apt=True, chromium=False)
    first = _make(b)
    assert first.returncode == 0, first.stderr
    assert (b / "chromium").exists()
    calls = _apt_calls(tmp_path)
    assert calls[0] == "update -qq" and calls[-1] == "install -y -qq chromium"
    second = _make(b)  # a second call installs nothing
    assert second.returncode == 0 and _apt_calls(tmp_path) == calls


@pytest.mark.parametrize("uid, apt", [(1000, True), (0, False)], ids=["not-root", "no-apt-get"])
def test_missing_chromium_stops_with_one_line_saying_what_to_install(tmp_path, uid, apt):
    b = _bin(tmp_path, uid=uid, apt=apt, chromium=False)
    run = _make(b)
    assert run.returncode != 0
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1, run.stderr
    assert "headless Chromium" in lines[0] and "apt-get install -y chromium" in lines[0]
    assert _apt_calls(tmp_path) == []
