"""Pull sources: a drop folder and HTTP(S) endpoints that serve export files.

A drop folder is read only when a file is complete: either its completion marker
(``NAME.ready``, a 0-byte file the exporter writes last) exists, or its size and mtime
have held still for ``stable_seconds``. HTTP pulls retry with exponential backoff and
write to a temporary name first, so a half-downloaded file is never seen as an export.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from urllib.parse import urlparse

import httpx


@dataclass
class FolderScan:
    """Files of a drop folder: ready to read, and held back (with why)."""

    ready: list[Path] = field(default_factory=list)
    waiting: dict[Path, str] = field(default_factory=dict)


@dataclass
class DropFolder:
    """A drop folder polled for complete export files.

    A file is ready when its marker exists, or when its mtime is at least
    ``stable_seconds`` old and its (size, mtime) equal what the previous poll saw (on the
    first poll, the mtime's age alone decides: it was written before we looked).
    """

    path: Path
    pattern: str = "*.csv"
    stable_seconds: float = 5.0
    marker_suffix: str = ".ready"
    clock: Callable[[], float] = time.time
    _seen: dict[Path, tuple[int, int]] = field(default_factory=dict, repr=False)

    def scan(self) -> FolderScan:
        """Look once; return the files ready now (sorted by name) and the ones waiting."""
        scan = FolderScan()
        now = self.clock()
        if not self.path.is_dir():
            raise FileNotFoundError(f"drop folder {self.path} does not exist")
        for candidate in sorted(self.path.glob(self.pattern)):
            if not candidate.is_file() or candidate.name.endswith(self.marker_suffix):
                continue
            stat = candidate.stat()
            state = (stat.st_size, stat.st_mtime_ns)
            marker = candidate.with_name(candidate.name + self.marker_suffix)
            previous = self._seen.get(candidate)
            unchanged = previous is None or previous == state
            if marker.exists() or (now - stat.st_mtime >= self.stable_seconds and unchanged):
                scan.ready.append(candidate)
            else:
                age = now - stat.st_mtime
                scan.waiting[candidate] = (
                    f"still changing or too new (modified {age:.1f} s ago; waits for "
                    f"{self.stable_seconds:g} s of stillness or {marker.name})"
                )
            self._seen[candidate] = state
        return scan


class PullError(RuntimeError):
    """An HTTP source that kept failing after every retry."""


def pull_http(
    url: str,
    dest_dir: Path,
    *,
    retries: int = 4,
    backoff_s: float = 1.0,
    timeout_s: float = 30.0,
    client: httpx.Client | None = None,
    sleep: Callable[[float], None] = time.sleep,
) -> Path:
    """Download ``url`` into ``dest_dir`` and return the file's path.

    Connection errors, timeouts, HTTP 429 and 5xx are retried ``retries`` times with
    backoff ``backoff_s * 2**attempt``; other 4xx fail at once (retrying will not help).
    The body is streamed to ``NAME.partial`` and renamed when complete.
    """
    dest_dir.mkdir(parents=True, exist_ok=True)
    name = Path(urlparse(url).path).name or "export.csv"
    target = dest_dir / name
    partial = target.with_name(target.name + ".partial")
    own_client = client is None
    http = client or httpx.Client(timeout=timeout_s, follow_redirects=True)
    last_error = "no attempt made"
    try:
        for attempt in range(retries + 1):
            try:
                with http.stream("GET", url) as response:
                    if response.status_code == 429 or response.status_code >= 500:
                        last_error = f"HTTP {response.status_code}"
                    elif response.status_code >= 400:
                        raise PullError(f"{url}: HTTP {response.status_code}; not retried")
                    else:
                        with partial.open("wb") as handle:
                            for block in response.iter_bytes(1 << 20):
                                handle.write(block)
                        partial.replace(target)
                        return target
            except (httpx.TransportError, httpx.TimeoutException) as exc:
                last_error = f"{type(exc).__name__}: {exc}"
            if attempt < retries:
                sleep(backoff_s * 2**attempt)
    finally:
        partial.unlink(missing_ok=True)
        if own_client:
            http.close()
    raise PullError(f"{url}: failed after {retries + 1} attempts; last error: {last_error}")
