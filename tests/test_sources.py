"""Pull sources: the drop folder's completeness rule and HTTP pulls with retries."""

from __future__ import annotations

import os
import threading
from collections.abc import Iterator
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import pytest

from ingest.sources import DropFolder, PullError, pull_http


class FakeClock:
    def __init__(self, now: float) -> None:
        self.now = now

    def __call__(self) -> float:
        return self.now


def _write(path: Path, text: str, mtime: float) -> None:
    path.write_text(text)
    os.utime(path, (mtime, mtime))


def test_fresh_file_waits_until_still(tmp_path: Path) -> None:
    clock = FakeClock(1_000_000.0)
    folder = DropFolder(tmp_path, stable_seconds=5, clock=clock)
    export = tmp_path / "a.csv"
    _write(export, "timestamp,P1\n", clock.now - 1)
    scan = folder.scan()
    assert scan.ready == [] and export in scan.waiting
    clock.now += 2
    _write(export, "timestamp,P1\n2026-01-01T00:00Z,1\n", clock.now - 0.5)  # still growing
    assert folder.scan().ready == []
    clock.now += 10  # nothing changed for 10 s
    assert folder.scan().ready == [export]


def test_marker_makes_a_file_ready_at_once_and_is_never_an_export(tmp_path: Path) -> None:
    clock = FakeClock(2_000_000.0)
    folder = DropFolder(tmp_path, stable_seconds=60, clock=clock)
    export = tmp_path / "b.csv"
    _write(export, "x\n", clock.now)
    (tmp_path / "b.csv.ready").write_bytes(b"")
    assert folder.scan().ready == [export]


def test_old_file_seen_first_time_is_ready(tmp_path: Path) -> None:
    clock = FakeClock(3_000_000.0)
    export = tmp_path / "c.csv"
    _write(export, "x\n", clock.now - 3600)
    assert DropFolder(tmp_path, stable_seconds=5, clock=clock).scan().ready == [export]


def test_missing_folder_is_a_clear_error(tmp_path: Path) -> None:
    with pytest.raises(FileNotFoundError, match=r"drop folder .* does not exist"):
        DropFolder(tmp_path / "nope").scan()


class _Flaky(BaseHTTPRequestHandler):
    calls = 0
    fail_first = 2

    def do_GET(self) -> None:
        type(self).calls += 1
        if self.path.endswith("missing.csv"):
            self.send_response(404)
            self.end_headers()
            return
        if type(self).calls <= type(self).fail_first:
            self.send_response(503)
            self.end_headers()
            return
        body = b"timestamp,P1\n2026-01-01T00:00:00Z,12.5\n"
        self.send_response(200)
        self.send_header("Content-Length", str(len(body)))
        self.end_headers()
        self.wfile.write(body)

    def log_message(self, *args: object) -> None:
        pass


@pytest.fixture
def http_server() -> Iterator[str]:
    _Flaky.calls = 0
    server = ThreadingHTTPServer(("127.0.0.1", 0), _Flaky)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_address[1]}"
    finally:
        server.shutdown()
        server.server_close()


def test_http_pull_retries_with_backoff_then_succeeds(http_server: str, tmp_path: Path) -> None:
    sleeps: list[float] = []
    path = pull_http(f"{http_server}/exports/day.csv", tmp_path, retries=3, backoff_s=0.5,
                     sleep=sleeps.append)
    assert path == tmp_path / "day.csv"
    assert path.read_text().endswith("12.5\n")
    assert sleeps == [0.5, 1.0]  # two 503s, exponential backoff
    assert not list(tmp_path.glob("*.partial"))


def test_http_pull_gives_up_after_retries(http_server: str, tmp_path: Path) -> None:
    _Flaky.fail_first = 100
    try:
        with pytest.raises(PullError, match="failed after 3 attempts; last error: HTTP 503"):
            pull_http(f"{http_server}/x.csv", tmp_path, retries=2, backoff_s=0,
                      sleep=lambda s: None)
    finally:
        _Flaky.fail_first = 2
    assert not (tmp_path / "x.csv").exists()


def test_http_404_is_not_retried(http_server: str, tmp_path: Path) -> None:
    with pytest.raises(PullError, match="HTTP 404; not retried"):
        pull_http(f"{http_server}/missing.csv", tmp_path, retries=3, sleep=lambda s: None)
    assert _Flaky.calls == 1


def test_connection_refused_is_retried_and_reported(tmp_path: Path) -> None:
    with pytest.raises(PullError, match="ConnectError"):
        pull_http("http://127.0.0.1:9/x.csv", tmp_path, retries=1, backoff_s=0,
                  sleep=lambda s: None)
