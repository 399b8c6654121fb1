"""Alert delivery for real: signed webhooks to a local receiver, outbox, retries, MQTT.

The receiver is a real HTTP server on 127.0.0.1 (a thread) that checks every signature
(with :func:`jobs.hooks.verify_signature` and with an independent RFC 2104 construction)
and drops repeats by idempotency key. The crash test runs the dispatcher in a subprocess
against the same database, takes the receiver down mid-stream, kills the dispatcher with
SIGKILL while a request is in flight, restarts both, and checks that every message arrived,
each key was processed once, and the outbox shows every message delivered.
"""

from __future__ import annotations

import hashlib
import json
import os
import queue
import signal
import socket
import subprocess
import sys
import threading
import time
import uuid
from collections.abc import Callable, Iterator
from datetime import UTC, datetime, timedelta
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any

import paho.mqtt.client as mqtt
import pytest
from paho.mqtt.enums import CallbackAPIVersion
from sqlalchemy import Engine, select

from hydrodrift.settings import Settings
from jobs.hooks import (
    ATTEMPT_HEADER,
    EVENT_HEADER,
    IDEMPOTENCY_HEADER,
    SIGNATURE_HEADER,
    Delivery,
    DeliveryResult,
    serialize_body,
    sign,
    verify_signature,
)
from jobs.outbox import (
    ADVISORY,
    LEASE_TIMEOUTS,
    SCHEMA,
    backoff_delay,
    dead_letters,
    dispatch_once,
    enqueue,
    envelope,
    episode_body,
    resend,
)
from store.engine import session_scope
from store.models import AlertEpisode, OutboxMessage

REPO = Path(__file__).resolve().parents[1]
SECRET = "test-secret-\u00e9"  # non-ASCII on purpose: the key is UTF-8
T0 = datetime(2026, 12, 2, 8, 0, tzinfo=UTC)
MQTT_HOST, MQTT_PORT = "127.0.0.1", 1883
CI = os.environ.get("CI", "").lower() in ("1", "true", "yes")


# --- an independent HMAC-SHA256 (RFC 2104 section 2, SHA-256 of FIPS 180-4) --------------

def rfc2104_hmac_sha256(key: bytes, message: bytes) -> str:
    """H((K ^ opad) || H((K ^ ipad) || m)), block size 64 bytes, written from RFC 2104."""
    block = 64
    if len(key) > block:
        key = hashlib.sha256(key).digest()
    key = key.ljust(block, b"\x00")
    inner = hashlib.sha256(bytes(b ^ 0x36 for b in key) + message).digest()
    return hashlib.sha256(bytes(b ^ 0x5C for b in key) + inner).hexdigest()


def independent_check(secret: str, header: str, body: bytes) -> bool:
    fields = dict(part.split("=", 1) for part in header.split(","))
    expected = rfc2104_hmac_sha256(secret.encode("utf-8"), f"{fields['t']}.".encode() + body)
    return fields.get("v1") == expected


# --- a real receiver --------------------------------------------------------------------

class Receiver:
    """Webhook receiver on 127.0.0.1: verifies, records, dedups; can fail, hold, go down."""

    def __init__(self, secret: str) -> None:
        self.secret = secret
        self.lock = threading.Lock()
        self.arrivals: list[dict[str, Any]] = []  # every request, in order
        self.processed: dict[str, bytes] = {}  # key -> body, first time only (dedup)
        self.duplicates: list[str] = []
        self.status = 200
        self.extra_headers: dict[str, str] = {}
        self.delay_s = 0.0
        self.hold_next = False
        self.held_key = ""
        self.held = threading.Event()
        self.release = threading.Event()
        self.port = 0
        self.server: ThreadingHTTPServer | None = None

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}/hook"

    def start(self) -> None:
        receiver = self

        class Handler(BaseHTTPRequestHandler):
            def do_POST(self) -> None:
                receiver.handle(self)

            def log_message(self, *_args: Any) -> None:
                pass

        server = ThreadingHTTPServer(("127.0.0.1", self.port), Handler)
        server.daemon_threads = True
        self.port = server.server_address[1]
        self.server = server
        threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.02},
                         daemon=True).start()

    def stop(self) -> None:
        assert self.server is not None
        self.server.shutdown()
        self.server.server_close()
        self.server = None

    def handle(self, request: BaseHTTPRequestHandler) -> None:
        body = request.rfile.read(int(request.headers["Content-Length"]))
        header = request.headers.get(SIGNATURE_HEADER, "")
        key = request.headers.get(IDEMPOTENCY_HEADER, "")
        ok = verify_signature(self.secret, header, body, 300.0)
        arrival = {"key": key, "body": body, "signature_ok": ok,
                   "independent_ok": independent_check(self.secret, header, body),
                   "attempt": int(request.headers.get(ATTEMPT_HEADER, "0")),
                   "event": request.headers.get(EVENT_HEADER),
                   "content_type": request.headers.get("Content-Type")}
        hold = False
        with self.lock:
            self.arrivals.append(arrival)
            status = self.status if ok else 401
            if status == 200:
                if key in self.processed:
                    self.duplicates.append(key)
                else:
                    self.processed[key] = body
            if self.hold_next and status == 200:
                self.hold_next, hold, self.held_key = False, True, key
        if self.delay_s:
            time.sleep(self.delay_s)
        if hold:  # processed, but the answer waits: the dispatcher dies before it
            self.held.set()
            self.release.wait(30)
        try:
            request.send_response(status)
            for name, value in self.extra_headers.items():
                request.send_header(name, value)
            request.send_header("Content-Length", "2")
            request.end_headers()
            request.wfile.write(b"ok")
        except OSError:
            pass  # the client is gone (killed dispatcher)


@pytest.fixture
def receiver() -> Iterator[Receiver]:
    rec = Receiver(SECRET)
    rec.start()
    yield rec
    rec.release.set()
    if rec.server is not None:
        rec.stop()


def _settings(tmp_path: Path, **overrides: Any) -> Settings:
    values: dict[str, Any] = {
        "data_dir": tmp_path, "webhook_secret": SECRET, "delivery_backoff_s": 0.05,
        "delivery_backoff_max_s": 0.4, "delivery_timeout_s": 1.0, "delivery_max_attempts": 100,
    }
    values.update(overrides)
    return Settings(_env_file=None, **values)


def _episode(i: int) -> dict[str, Any]:
    return {"episode": {"id": i, "plant": "PA", "unit": f"U{i}", "signature": "cavitation",
                        "severity": "warning", "status": "open", "opened_at": T0,
                        "peak": 3.5 + i, "summary": {"windows": i}}}


def _enqueue(engine: Engine, settings: Settings, n: int, now: datetime | None = None
             ) -> list[str]:
    with session_scope(engine) as session:
        rows = []
        for i in range(n):
            rows += enqueue(session, event="episode.opened", payload=_episode(i),
                            episode_id=i, settings=settings, now=now)
        return [r.idempotency_key for r in rows]


def _rows(engine: Engine) -> list[OutboxMessage]:
    with session_scope(engine) as session:
        return list(session.scalars(select(OutboxMessage).order_by(OutboxMessage.id)))


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


class FixedRng:
    """A jitter source that always draws ``u``."""

    def __init__(self, u: float) -> None:
        self.u = u

    def random(self) -> float:
        return self.u


def _wait(predicate: Callable[[], bool], timeout: float, what: str) -> None:
    deadline = time.monotonic() + timeout
    while not predicate():
        if time.monotonic() > deadline:
            pytest.fail(f"timed out after {timeout} s waiting for {what}")
        time.sleep(0.02)


# --- signature --------------------------------------------------------------------------

def test_independent_hmac_matches_rfc_4231_vectors() -> None:
    # RFC 4231, section 4.2 (test case 1) and 4.3 (test case 2), HMAC-SHA-256 (from memory)
    assert rfc2104_hmac_sha256(b"\x0b" * 20, b"Hi There") == (
        "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7")
    assert rfc2104_hmac_sha256(b"Jefe", b"what do ya want for nothing?") == (
        "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843")
    # RFC 4231 section 4.7 (test case 6): a 131-byte key is hashed first (from memory)
    assert rfc2104_hmac_sha256(
        b"\xaa" * 131, b"Test Using Larger Than Block-Size Key - Hash Key First") == (
        "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54")


def test_signature_header_is_hmac_over_timestamp_dot_body() -> None:
    body = serialize_body({"schema": SCHEMA, "x": 1.5, "text": "d\u00e9bit"})
    header = sign(SECRET, body, timestamp=1_764_662_400)
    t_part, v_part = header.split(",")
    assert t_part == "t=1764662400"
    # the signed string is "<t>." followed by the exact body bytes (RFC 2104, SHA-256)
    assert v_part == "v1=" + rfc2104_hmac_sha256(SECRET.encode(), b"1764662400." + body)
    now = 1_764_662_400
    assert verify_signature(SECRET, header, body, 300.0, now=now)
    assert verify_signature(SECRET, header, body.decode(), 300.0, now=now + 300)
    assert not verify_signature(SECRET, header, body, 300.0, now=now + 301)  # stale
    assert not verify_signature(SECRET, header, body, 300.0, now=now - 301)
    assert not verify_signature(SECRET, header, body + b" ", 300.0, now=now)  # tampered
    assert not verify_signature("other", header, body, 300.0, now=now)
    other_t = sign(SECRET, body, timestamp=now + 1).split(",")[1]
    assert not verify_signature(SECRET, f"t={now},{other_t}", body, 300.0, now=now)
    for bad in (None, "", "v1=ab", "t=1764662400", "t=x,v1=ab", "garbage", "t=1,,v1=a"):
        assert not verify_signature(SECRET, bad, body, 1e12, now=now)
    rotated = f"t={now},v1={'0' * 64},{v_part}"  # two keys during a rotation: any match
    assert verify_signature(SECRET, rotated, body, 300.0, now=now)


# --- envelope and enqueue ---------------------------------------------------------------

def test_envelope_is_versioned_and_json_clean() -> None:
    payload = _episode(1)
    payload["episode"]["peak"] = float("nan")
    doc = envelope(event="episode.opened", payload=payload, idempotency_key="k1", created_at=T0)
    assert doc["schema"] == "hydrodrift.alert/1" and doc["event"] == "episode.opened"
    assert doc["idempotency_key"] == "k1" and doc["created_at"] == "2026-12-02T08:00:00Z"
    assert doc["sent_by"]["service"] == "hydrodrift" and doc["advisory"] == ADVISORY
    assert doc["episode"]["peak"] is None  # NaN is not JSON
    assert doc["episode"]["opened_at"] == "2026-12-02T08:00:00Z"
    assert json.loads(serialize_body(doc)) == doc
    with pytest.raises(ValueError, match="set by the envelope"):
        envelope(event="e", payload={**_episode(1), "schema": "x"}, idempotency_key="k",
                 created_at=T0)
    with pytest.raises(ValueError, match="event"):
        envelope(event="Episode Opened", payload=_episode(1), idempotency_key="k",
                 created_at=T0)
    with pytest.raises(ValueError, match="plant"):
        envelope(event="e", payload={"episode": {"unit": "U1"}}, idempotency_key="k",
                 created_at=T0)
    with pytest.raises(ValueError, match="naive"):
        envelope(event="e", payload={**_episode(1), "at": datetime(2026, 1, 1)},
                 idempotency_key="k", created_at=T0)


def test_episode_body_serialises_a_stored_episode() -> None:
    ep = AlertEpisode(id=7, unit_id=3, signature="rough_zone", severity="critical",
                      status="open", opened_at=T0, updated_at=T0 + timedelta(hours=1),
                      closed_at=None, first_window=T0, last_window=T0 + timedelta(minutes=50),
                      n_windows=5, peak=4.25, summary={"top": ["hf_vibration"]})
    body = episode_body(ep, plant="PA", unit="G1")
    assert body["id"] == 7 and body["plant"] == "PA" and body["unit"] == "G1"
    assert body["updated_at"] == "2026-12-02T09:00:00Z" and body["closed_at"] is None
    assert body["summary"] == {"top": ["hf_vibration"]} and body["n_windows"] == 5


def test_enqueue_joins_the_callers_transaction(engine: Engine, tmp_path: Path) -> None:
    settings = _settings(tmp_path, webhook_urls=["http://127.0.0.1:9/a", "http://127.0.0.1:9/b"],
                         mqtt_host="broker.local", mqtt_port=1884, mqtt_topic="plants/alerts/")
    with pytest.raises(RuntimeError, match="event failed"), session_scope(engine) as session:
        enqueue(session, event="episode.opened", payload=_episode(1), episode_id=1,
                settings=settings)
        raise RuntimeError("event failed")  # the event's transaction rolls back ...
    assert _rows(engine) == []  # ... and its messages with it
    keys = _enqueue(engine, settings, 1, now=T0)
    rows = _rows(engine)
    assert [(r.channel, r.target) for r in rows] == [
        ("webhook", "http://127.0.0.1:9/a"), ("webhook", "http://127.0.0.1:9/b"),
        ("mqtt", "mqtt://broker.local:1884/plants/alerts/PA/U0")]
    assert len(set(keys)) == 3 and all(len(k) == 32 for k in keys)
    for row in rows:
        assert row.status == "pending" and row.attempts == 0 and row.next_attempt_at == T0
        assert row.payload["idempotency_key"] == row.idempotency_key
        assert row.payload["schema"] == SCHEMA and row.episode_id == 0
    with session_scope(engine) as session:
        assert enqueue(session, event="episode.opened", payload=_episode(2), episode_id=2,
                       settings=_settings(tmp_path)) == []  # no target configured
        with pytest.raises(ValueError, match="MQTT topic level"):
            enqueue(session, event="e", payload={"episode": {"plant": "P/A", "unit": "U"}},
                    episode_id=None, settings=settings)


# --- backoff ----------------------------------------------------------------------------

def test_backoff_is_capped_exponential_with_equal_jitter(tmp_path: Path) -> None:
    # Equal jitter: d = min(cap, base*2**(n-1)); wait d/2 + U(0, d/2)
    # (M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog 2015, from memory)
    settings = _settings(tmp_path, delivery_backoff_s=2.0, delivery_backoff_max_s=900.0)
    for attempts, d in ((1, 2.0), (2, 4.0), (5, 32.0), (9, 512.0), (10, 900.0), (500, 900.0)):
        assert backoff_delay(attempts, settings, FixedRng(0.0)) == d / 2  # type: ignore[arg-type]
        assert backoff_delay(attempts, settings, FixedRng(0.5)) == 0.75 * d  # type: ignore[arg-type]
        assert backoff_delay(attempts, settings, FixedRng(1.0)) == d  # type: ignore[arg-type]
    with pytest.raises(ValueError):
        backoff_delay(0, settings)


# --- dispatch in process: outcomes, dead letters, re-send, lease ------------------------

@pytest.mark.parametrize(("status", "outcome"),
                         [(400, "dead"), (404, "dead"), (408, "retried"), (429, "retried"),
                          (503, "retried"), (204, "delivered")])
def test_status_classes(engine: Engine, tmp_path: Path, receiver: Receiver, status: int,
                        outcome: str) -> None:
    settings = _settings(tmp_path, webhook_urls=[receiver.url], delivery_backoff_s=0.1)
    receiver.status = status
    receiver.extra_headers = {"Retry-After": "0.3"} if status == 429 else {}
    _enqueue(engine, settings, 1, now=T0)
    summary = dispatch_once(engine, settings, now=T0, rng=FixedRng(0.0))  # type: ignore[arg-type]
    assert summary.claimed == 1 and getattr(summary, outcome) == 1
    (row,) = _rows(engine)
    assert row.attempts == 1
    assert row.status == {"dead": "dead", "retried": "pending", "delivered": "delivered"}[
        outcome]
    if outcome == "retried":
        assert row.last_error.startswith(f"attempt 1: HTTP {status}")
        # d = 0.1 s, u = 0 -> 0.05 s; a Retry-After of 0.3 s (under the 0.4 s cap) wins
        wait = 0.3 if status == 429 else 0.05
        assert row.next_attempt_at == T0 + timedelta(seconds=wait)
    (arrival,) = receiver.arrivals
    assert arrival["signature_ok"] and arrival["independent_ok"] and arrival["attempt"] == 1
    assert arrival["event"] == "episode.opened" and arrival["content_type"] == "application/json"
    assert json.loads(arrival["body"]) == row.payload


def test_dead_letters_after_max_attempts_then_resend(engine: Engine, tmp_path: Path,
                                                     receiver: Receiver) -> None:
    settings = _settings(tmp_path, webhook_urls=[receiver.url], delivery_max_attempts=3)
    receiver.status = 500
    (key,) = _enqueue(engine, settings, 1, now=T0)
    for hour in range(5):
        dispatch_once(engine, settings, now=T0 + timedelta(hours=hour))
    assert [a["attempt"] for a in receiver.arrivals] == [1, 2, 3]
    assert {a["key"] for a in receiver.arrivals} == {key}
    with session_scope(engine) as session:
        (dead,) = dead_letters(session)
        assert dead.idempotency_key == key and dead.attempts == 3 and dead.status == "dead"
        assert dead.last_error.startswith("attempt 3: HTTP 500")
        message_id = dead.id
    receiver.status = 200
    with session_scope(engine) as session:
        again = resend(session, message_id, now=T0 + timedelta(hours=6))
        assert again.status == "pending" and again.attempts == 0
    with session_scope(engine) as session:
        assert dead_letters(session) == []
    summary = dispatch_once(engine, settings, now=T0 + timedelta(hours=6))
    assert summary.delivered == 1
    assert receiver.arrivals[-1]["key"] == key and receiver.arrivals[-1]["attempt"] == 1
    assert list(receiver.processed) == [key]
    (row,) = _rows(engine)
    assert row.status == "delivered" and row.delivered_at == T0 + timedelta(hours=6)
    with session_scope(engine) as session:
        with pytest.raises(ValueError, match="only dead letters"):
            resend(session, message_id)
        with pytest.raises(LookupError):
            resend(session, message_id + 1000)


def test_unrecorded_attempt_is_resent_with_the_same_key_after_the_lease(
    engine: Engine, tmp_path: Path
) -> None:
    settings = _settings(tmp_path, webhook_urls=["http://127.0.0.1:9/x"], delivery_max_attempts=2)
    (key,) = _enqueue(engine, settings, 1, now=T0)
    seen: list[Delivery] = []

    def crashing(delivery: Delivery, _s: Settings) -> DeliveryResult:
        seen.append(delivery)
        raise SystemExit("dispatcher dies after sending")  # not caught: like a kill

    def fine(delivery: Delivery, _s: Settings) -> DeliveryResult:
        seen.append(delivery)
        return DeliveryResult(ok=True)

    with pytest.raises(SystemExit):
        dispatch_once(engine, settings, now=T0, senders={"webhook": crashing})
    (row,) = _rows(engine)
    lease = timedelta(seconds=LEASE_TIMEOUTS * settings.delivery_timeout_s)
    assert row.status == "pending" and row.attempts == 1 and row.next_attempt_at == T0 + lease
    before = T0 + lease - timedelta(milliseconds=1)
    assert dispatch_once(engine, settings, now=before, senders={"webhook": fine}).claimed == 0
    with pytest.raises(SystemExit):  # the lease is over: attempt 2, same key; dies again
        dispatch_once(engine, settings, now=T0 + lease, senders={"webhook": crashing})
    assert [(d.idempotency_key, d.attempt) for d in seen] == [(key, 1), (key, 2)]
    # the last allowed attempt recorded nothing: a dead letter once its lease is over
    summary = dispatch_once(engine, settings, now=T0 + 3 * lease, senders={"webhook": fine})
    assert summary.claimed == 0 and len(seen) == 2
    (row,) = _rows(engine)
    assert row.status == "dead" and "recorded no outcome" in row.last_error


# --- the crash test: subprocess dispatcher, receiver outage, SIGKILL, restart -----------

DISPATCHER = """
import logging, signal, threading
from hydrodrift.settings import Settings
from jobs.outbox import dispatch_forever
from store.engine import make_engine
logging.basicConfig(level=logging.INFO)
settings = Settings()
engine = make_engine(settings.effective_database_url, schema=settings.database_schema)
stop = threading.Event()
signal.signal(signal.SIGTERM, lambda *_: stop.set())
dispatch_forever(engine, settings, stop=stop, poll_s=0.05)
"""


def test_outage_and_killed_dispatcher_lose_nothing(engine: Engine, engine_env: dict[str, str],
                                                   tmp_path: Path, receiver: Receiver) -> None:
    n = 30
    settings = _settings(tmp_path, webhook_urls=[receiver.url])
    keys = _enqueue(engine, settings, n)
    env = engine_env | {
        "HYDRODRIFT_WEBHOOK_SECRET": SECRET, "HYDRODRIFT_DELIVERY_BACKOFF_S": "0.05",
        "HYDRODRIFT_DELIVERY_BACKOFF_MAX_S": "0.4", "HYDRODRIFT_DELIVERY_TIMEOUT_S": "1",
        "HYDRODRIFT_DELIVERY_MAX_ATTEMPTS": "100",
        "PYTHONPATH": os.pathsep.join(filter(None, [str(REPO), os.environ.get("PYTHONPATH")])),
    }

    def start() -> subprocess.Popen[bytes]:
        return subprocess.Popen([sys.executable, "-c", DISPATCHER], env=env, cwd=tmp_path,
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)

    receiver.delay_s = 0.03  # pace the stream so the outage lands in its middle
    proc = start()
    try:
        _wait(lambda: len(receiver.processed) >= 8, 30, "the first deliveries")
        receiver.stop()  # receiver outage, mid-stream
        with receiver.lock:
            before_outage = len(receiver.processed)
        assert before_outage < n, "the stream ended before the outage"

        def retried_during_outage() -> bool:
            return any(r.status == "pending" and r.attempts >= 3
                       and "ConnectError" in (r.last_error or "") for r in _rows(engine))

        _wait(retried_during_outage, 20, "a message retried 3 times against the closed port")
        assert proc.poll() is None, proc.stderr.read().decode() if proc.stderr else ""
        receiver.hold_next = True  # back up; the next request is processed, answer held
        receiver.start()
        assert receiver.held.wait(20), "no request reached the restarted receiver"
        os.kill(proc.pid, signal.SIGKILL)  # killed mid-delivery: outcome never recorded
        proc.wait(timeout=10)
        assert proc.returncode == -signal.SIGKILL
        receiver.release.set()
        held_key = receiver.held_key
        (held_row,) = [r for r in _rows(engine) if r.idempotency_key == held_key]
        assert held_row.status == "pending"  # sent and processed, but not recorded

        proc = start()  # restart: everything due goes out, the held one after its lease
        _wait(lambda: all(r.status == "delivered" for r in _rows(engine)), 30,
              "every outbox message delivered")
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=10) == 0  # graceful stop through the stop event
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()

    rows = _rows(engine)
    assert len(rows) == n and all(r.delivered_at is not None for r in rows)
    assert set(receiver.processed) == set(keys)  # none lost
    assert len(receiver.processed) == n  # each key processed once after dedup
    assert all(a["signature_ok"] and a["independent_ok"] for a in receiver.arrivals)
    assert {a["key"] for a in receiver.arrivals} == set(keys)  # nothing foreign
    # the held message was sent again after the restart, with the same key and body
    held_arrivals = [a for a in receiver.arrivals if a["key"] == held_key]
    assert len(held_arrivals) >= 2 and held_key in receiver.duplicates
    assert all(a["body"] == receiver.processed[held_key] for a in held_arrivals)
    attempts = [a["attempt"] for a in held_arrivals]
    assert attempts == sorted(attempts) and len(set(attempts)) == len(attempts)
    by_key = {r.idempotency_key: r for r in rows}
    assert by_key[held_key].attempts == attempts[-1]
    assert any("ConnectError" in (r.last_error or "") and r.attempts >= 3 for r in rows)
    for key in receiver.duplicates:  # every repeat carried the first body exactly
        assert all(a["body"] == receiver.processed[key] for a in receiver.arrivals
                   if a["key"] == key)


# --- MQTT ---------------------------------------------------------------------------------

def _broker_or_skip() -> None:
    try:
        with socket.create_connection((MQTT_HOST, MQTT_PORT), timeout=1.0):
            return
    except OSError as exc:
        reason = f"MQTT broker not reachable at {MQTT_HOST}:{MQTT_PORT}: {exc}"
    if CI:
        pytest.fail(f"CI=true but {reason}", pytrace=False)
    pytest.skip(reason)


def test_mqtt_publish_reaches_a_subscriber(engine: Engine, tmp_path: Path) -> None:
    _broker_or_skip()
    prefix = f"hydrodrift-test/{uuid.uuid4().hex[:12]}"
    settings = _settings(tmp_path, mqtt_host=MQTT_HOST, mqtt_port=MQTT_PORT, mqtt_topic=prefix)
    inbox: queue.Queue[mqtt.MQTTMessage] = queue.Queue()
    subscribed = threading.Event()
    sub = mqtt.Client(CallbackAPIVersion.VERSION2, client_id=f"sub-{uuid.uuid4().hex[:8]}")
    sub.on_message = lambda _c, _u, msg: inbox.put(msg)
    sub.on_subscribe = lambda *_: subscribed.set()
    sub.on_connect = lambda c, *_: c.subscribe(f"{prefix}/#", qos=1)
    sub.connect(MQTT_HOST, MQTT_PORT)
    sub.loop_start()
    try:
        assert subscribed.wait(5), "no SUBACK from the broker"
        (key,) = _enqueue(engine, settings, 1)
        summary = dispatch_once(engine, settings)
        assert summary.delivered == 1, _rows(engine)[0].last_error
        msg = inbox.get(timeout=5)
    finally:
        sub.disconnect()
        sub.loop_stop()
    (row,) = _rows(engine)
    assert msg.topic == f"{prefix}/PA/U0" and msg.qos == 1
    assert row.target == f"mqtt://{MQTT_HOST}:{MQTT_PORT}/{prefix}/PA/U0"
    doc = json.loads(msg.payload)
    assert doc == row.payload and doc["idempotency_key"] == key and doc["schema"] == SCHEMA
    assert row.status == "delivered" and row.attempts == 1


def test_mqtt_unreachable_broker_is_retried(engine: Engine, tmp_path: Path) -> None:
    settings = _settings(tmp_path, mqtt_host="127.0.0.1", mqtt_port=_free_port())
    _enqueue(engine, settings, 1, now=T0)
    summary = dispatch_once(engine, settings, now=T0, rng=FixedRng(1.0))  # type: ignore[arg-type]
    assert summary.retried == 1
    (row,) = _rows(engine)
    assert row.status == "pending" and row.last_error.startswith("attempt 1: MQTT connect")
    assert row.next_attempt_at == T0 + timedelta(seconds=0.05)  # d = base = 0.05 s, u = 1


def test_documented_signature_vector_verifies() -> None:
    doc = (REPO / "docs" / "alert-payload.md").read_text(encoding="utf-8")
    blocks = doc.split("```")
    body = next(b.strip() for b in blocks if b.strip().startswith('{"advisory"')).encode()
    header = doc.split("`X-Hydrodrift-Signature: ", 1)[1].split("`")[0]
    assert len(body) == 787 and json.loads(body)["schema"] == SCHEMA
    assert verify_signature("example-secret", header, body, 300.0, now=1_764_662_400)
    assert independent_check("example-secret", header, body)  # RFC 2104, not jobs.hooks
    assert sign("example-secret", body, timestamp=1_764_662_400) == header
