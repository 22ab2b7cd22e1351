"""`extractval serve`: the preview is served on 127.0.0.1 and a study edit rebuilds its page."""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

from site_factory import synthetic_study, write_study_folder

ROOT = Path(__file__).resolve().parent.parent


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _wait_for(url: str, text: str, timeout: float = 90.0) -> bool:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        try:
            with urllib.request.urlopen(url, timeout=5) as r:
                if text in r.read().decode("utf-8", "replace"):
                    return True
        except (urllib.error.URLError, ConnectionError, TimeoutError):
            pass
        time.sleep(0.5)
    return False


def test_serve_rebuilds_a_study_page_when_its_file_changes(tmp_path):
    shutil.copy(ROOT / "mkdocs.yml", tmp_path / "mkdocs.yml")
    shutil.copytree(ROOT / "site_templates", tmp_path / "site_templates")
    folder = write_study_folder(synthetic_study("SYN-001", title="First edition"),
                                tmp_path / "studies")
    port = _free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "extractval.cli", "serve", "--config",
         str(tmp_path / "mkdocs.yml"), "--addr", f"127.0.0.1:{port}"],
        cwd=tmp_path, stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
        env=dict(os.environ, PYTHONUNBUFFERED="1", PYTHONPATH=str(ROOT)))
    url = f"http://127.0.0.1:{port}/studies/SYN-001/"
    try:
        assert _wait_for(url, "First edition"), "the preview did not come up"
        yaml_file = folder / "study.yaml"
        yaml_file.write_text(yaml_file.read_text().replace("First edition", "Second edition"))
        assert _wait_for(url, "Second edition"), "the edit was not rebuilt"
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
    log = proc.stdout.read().decode("utf-8", "replace")
    assert "1/1 SYN-001" in log
