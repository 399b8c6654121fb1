"""Senders of alert messages: signed webhooks (httpx) and MQTT publishing (paho-mqtt).

A sender takes one :class:`Delivery` (a snapshot of an outbox row) and the settings and
returns a :class:`DeliveryResult`; it never raises for a failed delivery and never touches
the database (:mod:`jobs.outbox` claims, records and retries). The payload format and the
signature are documented in ``docs/alert-payload.md``.

Webhook: ``POST`` of the JSON body with the headers

- ``X-Hydrodrift-Signature: t=<unix seconds>,v1=<hex HMAC-SHA256(secret, "<t>.<body>")>``
  (HMAC as defined in RFC 2104 with SHA-256, FIPS 180-4); a fresh ``t`` on every attempt,
  so a receiver can refuse stale or replayed requests with a tolerance;
- ``X-Hydrodrift-Idempotency-Key``: the same on every attempt of one message;
- ``X-Hydrodrift-Event``, ``X-Hydrodrift-Attempt``, ``Content-Type: application/json``.

Outcome of a webhook attempt: 2xx is delivered; 408, 429, 5xx, connection errors and
timeouts are retried; any other status (3xx, other 4xx) is permanent and the message goes
to the dead letters at once: a refused URL, a wrong secret or a rejected payload do not
heal by repeating, and a dead letter stays visible and can be re-sent once the receiver or
the configuration is fixed. Without ``webhook_secret`` nothing is sent (permanent failure).

MQTT: QoS 1 publish of the same JSON body to the topic stored in the target, waiting for
the broker's PUBACK. MQTT 3.1.1 has no headers, so the idempotency key travels in the body
(``idempotency_key``); MQTT messages are not HMAC-signed (use broker authentication and
ACLs). One connection per message: alerts are rare, and no connection state survives a
dispatcher restart.

Alerts are advisory: a cavitation, rough-zone or vortex-rope signature calls for an
inspection by qualified staff; local codes and licensed practice prevail.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import threading
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any
from urllib.parse import urlsplit

import httpx
import paho.mqtt.client as mqtt
from paho.mqtt.enums import CallbackAPIVersion

from hydrodrift import __version__
from hydrodrift.settings import Settings

SIGNATURE_HEADER = "X-Hydrodrift-Signature"
IDEMPOTENCY_HEADER = "X-Hydrodrift-Idempotency-Key"
EVENT_HEADER = "X-Hydrodrift-Event"
ATTEMPT_HEADER = "X-Hydrodrift-Attempt"
#: Version tag of the signature scheme in the header (``v1=``).
SIGNATURE_SCHEME = "v1"
#: Statuses of the 4xx class that are worth retrying (Request Timeout, Too Many Requests).
RETRYABLE_4XX = frozenset({408, 429})
#: CONNACK refusals of MQTT 3.1.1 (section 3.2.2.3) that repeating will not cure, by the
#: names paho-mqtt gives them (return codes 1, 2, 4, 5); "Server unavailable" (3) is retried.
MQTT_PERMANENT_CONNACK = frozenset({
    "Unsupported protocol version", "Client identifier not valid",
    "Bad user name or password", "Not authorized",
})
#: Characters of an error text kept in the outbox (receivers may answer with whole pages).
ERROR_CHARS = 500


@dataclass(frozen=True)
class Delivery:
    """One attempt's view of an outbox message.

    Attributes
    ----------
    message_id : int
        Outbox row id.
    idempotency_key : str
        Key of the message, the same on every attempt.
    event : str
        Event name (``X-Hydrodrift-Event``).
    channel : str
        ``webhook`` or ``mqtt``.
    target : str
        Webhook URL, or ``mqtt://host:port/topic``.
    payload : dict
        The versioned envelope (``docs/alert-payload.md``).
    attempt : int
        1 for the first attempt.
    """

    message_id: int
    idempotency_key: str
    event: str
    channel: str
    target: str
    payload: dict[str, Any]
    attempt: int


@dataclass(frozen=True)
class DeliveryResult:
    """Outcome of one attempt.

    Attributes
    ----------
    ok : bool
        Delivered (webhook 2xx, MQTT PUBACK received).
    permanent : bool
        Failed in a way that repeating will not cure: dead letter at once.
    error : str or None
        What went wrong, for ``outbox.last_error``.
    retry_after : float or None [s]
        Delay the receiver asked for (``Retry-After``), if any.
    """

    ok: bool
    permanent: bool = False
    error: str | None = None
    retry_after: float | None = None


Sender = Callable[[Delivery, Settings], DeliveryResult]


def serialize_body(payload: Mapping[str, Any]) -> bytes:
    """The exact bytes sent: compact JSON, keys sorted, UTF-8, no NaN or infinity.

    The stored payload does not change between attempts, so every attempt of a message
    sends the same bytes.
    """
    return json.dumps(
        payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    ).encode("utf-8")


def _mac(secret: str, timestamp: int, body: bytes) -> str:
    message = f"{timestamp}.".encode("ascii") + body
    return hmac.new(secret.encode("utf-8"), message, hashlib.sha256).hexdigest()


def sign(secret: str, body: bytes, *, timestamp: int | None = None) -> str:
    """The value of ``X-Hydrodrift-Signature`` for ``body``.

    Parameters
    ----------
    secret : str
        Shared key (UTF-8).
    body : bytes
        Exact request body.
    timestamp : int, optional [s]
        Unix time of the attempt; now by default.

    Returns
    -------
    str
        ``t=<timestamp>,v1=<hex HMAC-SHA256(secret, f"{timestamp}.{body}")>`` (RFC 2104).
    """
    t = int(time.time()) if timestamp is None else int(timestamp)
    return f"t={t},{SIGNATURE_SCHEME}={_mac(secret, t, body)}"


def verify_signature(
    secret: str,
    header: str | None,
    body: bytes | str,
    tolerance_s: float = 300.0,
    *,
    now: float | None = None,
) -> bool:
    """Check a received ``X-Hydrodrift-Signature`` header (for receivers).

    Parameters
    ----------
    secret : str
        Shared key.
    header : str or None
        The header's value; several ``v1=`` entries are allowed (key rotation: any match).
    body : bytes or str
        The raw request body exactly as received (a ``str`` is encoded as UTF-8).
    tolerance_s : float [s]
        Largest accepted difference between ``t`` and ``now`` (replay protection).
    now : float, optional [s]
        Unix time of the check; the clock by default.

    Returns
    -------
    bool
        True when ``t`` is within the tolerance and one ``v1`` matches (constant-time
        comparison); False for a missing, malformed, stale or wrong signature.
    """
    if not header:
        return False
    timestamp: int | None = None
    candidates: list[str] = []
    for part in header.split(","):
        name, sep, value = part.strip().partition("=")
        if not sep:
            return False
        if name == "t":
            try:
                timestamp = int(value)
            except ValueError:
                return False
        elif name == SIGNATURE_SCHEME:
            candidates.append(value.strip().lower())
    if timestamp is None or not candidates:
        return False
    clock = time.time() if now is None else now
    if abs(clock - timestamp) > tolerance_s:
        return False
    raw = body.encode("utf-8") if isinstance(body, str) else body
    expected = _mac(secret, timestamp, raw)
    return any(hmac.compare_digest(expected, c) for c in candidates)


def _retry_after(response: httpx.Response) -> float | None:
    value = response.headers.get("Retry-After")
    if value is None:
        return None
    try:
        return max(0.0, float(value))
    except ValueError:
        return None  # the HTTP-date form is not honoured; the backoff applies


def _clip(text: str) -> str:
    return text if len(text) <= ERROR_CHARS else text[: ERROR_CHARS - 3] + "..."


def send_webhook(
    delivery: Delivery, settings: Settings, *, client: httpx.Client | None = None
) -> DeliveryResult:
    """POST one message to its webhook URL, signed; classify the outcome.

    Parameters
    ----------
    delivery : Delivery
        The message; ``target`` is the URL.
    settings : Settings
        ``webhook_secret`` (required) and ``delivery_timeout_s`` [s] (connect, write and
        read timeouts, each).
    client : httpx.Client, optional
        A client to reuse; a fresh one per call by default.

    Returns
    -------
    DeliveryResult
    """
    if not settings.webhook_secret:
        return DeliveryResult(ok=False, permanent=True,
                              error="webhook_secret is not set: nothing is sent unsigned")
    body = serialize_body(delivery.payload)
    headers = {
        "Content-Type": "application/json",
        "User-Agent": f"hydrodrift/{__version__}",
        SIGNATURE_HEADER: sign(settings.webhook_secret, body),
        IDEMPOTENCY_HEADER: delivery.idempotency_key,
        EVENT_HEADER: delivery.event,
        ATTEMPT_HEADER: str(delivery.attempt),
    }
    try:
        if client is None:
            with httpx.Client(timeout=settings.delivery_timeout_s) as own:
                response = own.post(delivery.target, content=body, headers=headers)
        else:
            response = client.post(delivery.target, content=body, headers=headers,
                                   timeout=settings.delivery_timeout_s)
    except httpx.HTTPError as exc:  # connect / read / write / pool timeouts, refused, reset
        return DeliveryResult(ok=False, error=_clip(f"{type(exc).__name__}: {exc}"))
    status = response.status_code
    if 200 <= status < 300:
        return DeliveryResult(ok=True)
    error = _clip(f"HTTP {status}: {response.text.strip()}")
    if status >= 500 or status in RETRYABLE_4XX:
        return DeliveryResult(ok=False, error=error, retry_after=_retry_after(response))
    return DeliveryResult(ok=False, permanent=True, error=error)


def mqtt_target(host: str, port: int, topic: str) -> str:
    """The outbox target of an MQTT message: ``mqtt://host:port/topic``."""
    return f"mqtt://{host}:{port}/{topic}"


def parse_mqtt_target(target: str) -> tuple[str, int, str]:
    """``(host, port, topic)`` of an ``mqtt://host:port/topic`` target.

    Raises
    ------
    ValueError
        If the target is not of that form.
    """
    parts = urlsplit(target)
    topic = parts.path[1:]
    if parts.scheme != "mqtt" or not parts.hostname or not topic:
        raise ValueError(f"MQTT target {target!r}: expected mqtt://HOST:PORT/TOPIC")
    return parts.hostname, parts.port or 1883, topic


def send_mqtt(delivery: Delivery, settings: Settings) -> DeliveryResult:
    """Publish one message with QoS 1 and wait for the broker's PUBACK.

    Parameters
    ----------
    delivery : Delivery
        The message; ``target`` is ``mqtt://host:port/topic``.
    settings : Settings
        ``delivery_timeout_s`` [s]: longest wait for CONNACK, and again for PUBACK.

    Returns
    -------
    DeliveryResult
        Delivered once the PUBACK is in; refused credentials or a bad target are
        permanent; anything else (refused connection, timeout) is retried.
    """
    try:
        host, port, topic = parse_mqtt_target(delivery.target)
    except ValueError as exc:
        return DeliveryResult(ok=False, permanent=True, error=str(exc))
    timeout = settings.delivery_timeout_s
    connected = threading.Event()
    connack: list[Any] = []

    def on_connect(_c: mqtt.Client, _u: Any, _f: Any, reason: Any, _p: Any) -> None:
        connack.append(reason)
        connected.set()

    client = mqtt.Client(CallbackAPIVersion.VERSION2,
                         client_id=f"hydrodrift-{delivery.idempotency_key[:16]}-"
                                   f"{delivery.attempt}",
                         protocol=mqtt.MQTTv311, reconnect_on_failure=False)
    client.on_connect = on_connect
    try:
        client.connect(host, port, keepalive=max(5, int(4 * timeout)))
    except OSError as exc:
        return DeliveryResult(ok=False, error=_clip(f"MQTT connect {host}:{port}: "
                                                    f"{type(exc).__name__}: {exc}"))
    client.loop_start()
    try:
        if not connected.wait(timeout):
            return DeliveryResult(ok=False, error=f"MQTT {host}:{port}: no CONNACK in "
                                                  f"{timeout} s")
        reason = connack[0]
        if reason.is_failure:
            return DeliveryResult(ok=False, permanent=str(reason) in MQTT_PERMANENT_CONNACK,
                                  error=f"MQTT {host}:{port}: connection refused: {reason}")
        info = client.publish(topic, serialize_body(delivery.payload), qos=1)
        try:
            info.wait_for_publish(timeout)
        except (RuntimeError, ValueError) as exc:
            return DeliveryResult(ok=False, error=_clip(f"MQTT publish to {topic!r}: {exc}"))
        if not info.is_published():
            return DeliveryResult(ok=False, error=f"MQTT publish to {topic!r}: no PUBACK in "
                                                  f"{timeout} s")
        return DeliveryResult(ok=True)
    finally:
        client.disconnect()
        client.loop_stop()


def default_senders() -> dict[str, Sender]:
    """The sender of each channel: ``webhook`` and ``mqtt``."""
    return {"webhook": send_webhook, "mqtt": send_mqtt}
