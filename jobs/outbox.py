"""Transactional outbox of alert messages: enqueue with the event, dispatch, retry, dead letters.

Guarantees (``docs/alert-payload.md`` has the receiver's side):

- **Nothing lost.** :func:`enqueue` adds the messages to the *caller's* session; they are
  committed, or rolled back, with the event that caused them. A message in the store is
  retried until it is delivered or becomes a dead letter; a dead letter stays listed
  (:func:`dead_letters`) until it is re-sent (:func:`resend`).
- **At least once, same key.** Every message has one idempotency key (``uuid4().hex``,
  drawn once at enqueue and stored; every attempt and every re-send carries it). A crash
  after a send and before its outcome is recorded means the message is sent again with
  that key: receivers drop repeats by the key.
- **Claim by lease.** A dispatcher claims a due message in a short transaction: one more
  attempt, and ``next_attempt_at`` pushed ``LEASE_TIMEOUTS * delivery_timeout_s`` ahead.
  The send runs outside any transaction, and the outcome is recorded in a second one. A
  dispatcher killed in between leaves the message pending, due again when the lease ends.
  On PostgreSQL the claim reads with ``SELECT ... FOR UPDATE SKIP LOCKED`` so several
  dispatchers never wait on each other; on both dialects the claim is a conditional update
  (``attempts`` unchanged since read), so two dispatchers never claim the same attempt.
  SQLite is meant for a single dispatcher (the deployment's one scheduler): a second one is
  safe but serialises on the database's single writer.
- **Backoff.** After a retryable failure of attempt ``n`` the message waits
  ``d = min(delivery_backoff_max_s, delivery_backoff_s * 2**(n-1))`` with *equal jitter*,
  ``d/2 + U(0, d/2)``: at least half the exponential delay (no hammering of a receiver that
  is down) and spread over the other half (no thundering herd when it comes back), after
  M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog, 2015. A
  ``Retry-After`` from the receiver lengthens the wait (up to the maximum).
- **Dead letters** after ``delivery_max_attempts`` attempts, or at once after a permanent
  failure (:mod:`jobs.hooks`). A message whose last allowed attempt ended without a
  recorded outcome (dispatcher killed) also becomes a dead letter when its lease ends.

Alerts are advisory: a cavitation, rough-zone or vortex-rope signature calls for an
inspection by qualified staff; local codes and licensed practice prevail.
"""

from __future__ import annotations

import logging
import math
import random
import re
import threading
import uuid
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from typing import Any

from sqlalchemy import Engine, select, update
from sqlalchemy.orm import Session

from hydrodrift import __version__
from hydrodrift.settings import Settings
from jobs.hooks import Delivery, DeliveryResult, Sender, default_senders, mqtt_target
from store.engine import session_scope
from store.models import AlertEpisode, OutboxMessage, utc_now

log = logging.getLogger(__name__)

#: Name and version of the payload envelope; a new version is a new name, never a change.
SCHEMA = "hydrodrift.alert/1"
#: Keys of the envelope the caller's payload may not set.
RESERVED_KEYS = frozenset({"schema", "event", "idempotency_key", "created_at", "sent_by",
                           "advisory"})
ADVISORY = ("Advisory only: a flagged signature calls for inspection by qualified staff; "
            "local codes and licensed practice prevail.")
#: A claim's lease, in delivery timeouts: a send's connect, write and read phases each have
#: the timeout, plus a margin.
LEASE_TIMEOUTS = 4.0
_EVENT = re.compile(r"^[a-z][a-z0-9_.-]{0,31}$")
_TOPIC_LEVEL_FORBIDDEN = re.compile(r"[/+#\x00]")

PENDING, DELIVERED, DEAD = "pending", "delivered", "dead"


def _iso(value: datetime) -> str:
    if value.tzinfo is None:
        raise ValueError(f"naive datetime {value!r} in an alert payload: give UTC")
    return value.astimezone(UTC).isoformat().replace("+00:00", "Z")


def _jsonable(value: Any, path: str) -> Any:
    """``value`` as plain JSON types: datetimes as ISO 8601 UTC, non-finite floats as null."""
    if value is None or isinstance(value, bool | str | int):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, datetime):
        return _iso(value)
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, Mapping):
        return {str(k): _jsonable(v, f"{path}.{k}") for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_jsonable(v, f"{path}[{i}]") for i, v in enumerate(value)]
    if hasattr(value, "item"):  # numpy scalar
        return _jsonable(value.item(), path)
    raise TypeError(f"alert payload {path}: {type(value).__name__} is not JSON")


def episode_body(episode: AlertEpisode, *, plant: str, unit: str) -> dict[str, Any]:
    """The ``episode`` object of the envelope, from a stored episode.

    Parameters
    ----------
    episode : AlertEpisode
        The episode (flushed, so that it has an id).
    plant, unit : str
        Codes of its plant and unit (the MQTT topic levels).

    Returns
    -------
    dict
        JSON-ready: instants as ISO 8601 UTC strings.
    """
    fields = ("id", "signature", "severity", "status", "opened_at", "updated_at", "closed_at",
              "first_window", "last_window", "n_windows", "peak", "summary",
              "acknowledged_by", "acknowledged_at", "resolved_by", "resolved_at", "note")
    body: dict[str, Any] = {"plant": plant, "unit": unit}
    body.update({name: getattr(episode, name) for name in fields})
    return _jsonable(body, "episode")


def envelope(*, event: str, payload: Mapping[str, Any], idempotency_key: str,
             created_at: datetime) -> dict[str, Any]:
    """The versioned JSON document of one message (``docs/alert-payload.md``).

    Raises
    ------
    ValueError
        If the event name is not ``[a-z][a-z0-9_.-]{0,31}``, ``payload`` lacks an
        ``episode`` object with string ``plant`` and ``unit``, or sets a reserved key.
    """
    if not _EVENT.match(event):
        raise ValueError(f"alert event {event!r}: expected [a-z][a-z0-9_.-], at most 32")
    reserved = RESERVED_KEYS.intersection(payload)
    if reserved:
        raise ValueError(f"alert payload: keys {sorted(reserved)} are set by the envelope")
    episode = payload.get("episode")
    if not isinstance(episode, Mapping) or not all(
        isinstance(episode.get(k), str) and episode.get(k) for k in ("plant", "unit")
    ):
        raise ValueError("alert payload: expected 'episode' with string 'plant' and 'unit'")
    doc: dict[str, Any] = {
        "schema": SCHEMA,
        "event": event,
        "idempotency_key": idempotency_key,
        "created_at": created_at,
        "sent_by": {"service": "hydrodrift", "version": __version__},
        "advisory": ADVISORY,
    }
    doc.update(payload)
    doc["schema"] = SCHEMA  # the envelope's own keys win (RESERVED_KEYS checked above)
    return _jsonable(doc, "payload")


def _mqtt_topic(settings: Settings, plant: str, unit: str) -> str:
    for level in (plant, unit):
        if _TOPIC_LEVEL_FORBIDDEN.search(level):
            raise ValueError(f"MQTT topic level {level!r}: '/', '+', '#' are not allowed")
    return f"{settings.mqtt_topic.rstrip('/')}/{plant}/{unit}"


def enqueue(
    session: Session,
    *,
    event: str,
    payload: Mapping[str, Any],
    episode_id: int | None,
    settings: Settings,
    now: datetime | None = None,
) -> list[OutboxMessage]:
    """Add one outbox message per configured target to the caller's transaction.

    Nothing is committed here: the caller commits the messages with the event itself
    (that is the transactional outbox), or a rollback drops both.

    Parameters
    ----------
    session : Session
        The caller's session, inside its transaction.
    event : str
        Event name, e.g. ``episode.opened`` (``[a-z][a-z0-9_.-]``, at most 32).
    payload : mapping
        Body fields; must hold ``episode`` (see :func:`episode_body`) with ``plant`` and
        ``unit`` codes; may add more keys (not the reserved ones of the envelope).
    episode_id : int or None
        Episode the message is about (indexed, for look-ups).
    settings : Settings
        ``webhook_urls`` (one message each) and ``mqtt_host`` / ``mqtt_port`` /
        ``mqtt_topic`` (one message to ``<mqtt_topic>/<plant>/<unit>`` when a host is set).
    now : datetime, optional
        Creation instant (UTC); the clock by default. The messages are due at once.

    Returns
    -------
    list of OutboxMessage
        The new rows, flushed (ids assigned); empty when no target is configured.
    """
    created = now or utc_now()
    # validates event and payload even when no target is configured
    envelope(event=event, payload=payload, idempotency_key="", created_at=created)
    targets: list[tuple[str, str]] = [("webhook", url) for url in settings.webhook_urls]
    if settings.mqtt_host:
        episode = payload["episode"]
        topic = _mqtt_topic(settings, episode["plant"], episode["unit"])
        targets.append(("mqtt", mqtt_target(settings.mqtt_host, settings.mqtt_port, topic)))
    if not targets:
        log.debug("alert %s: no webhook URL and no MQTT host configured", event)
    messages: list[OutboxMessage] = []
    for channel, target in targets:
        key = uuid.uuid4().hex
        doc = envelope(event=event, payload=payload, idempotency_key=key, created_at=created)
        messages.append(OutboxMessage(
            idempotency_key=key, episode_id=episode_id, event=event, channel=channel,
            target=target, payload=doc, status=PENDING, attempts=0, next_attempt_at=created,
            last_error=None, created_at=created, delivered_at=None,
        ))
    session.add_all(messages)
    session.flush()
    return messages


def backoff_delay(attempts: int, settings: Settings, rng: random.Random | None = None) -> float:
    """Wait after the failed attempt number ``attempts`` (1 = first), equal jitter.

    Parameters
    ----------
    attempts : int
        Attempts made so far (>= 1).
    settings : Settings
        ``delivery_backoff_s`` [s] (first delay) and ``delivery_backoff_max_s`` [s] (cap).
    rng : random.Random, optional
        Source of the jitter.

    Returns
    -------
    float [s]
        ``d/2 + U(0, d/2)`` with ``d = min(max, base * 2**(attempts-1))``
        (M. Brooker, "Exponential Backoff And Jitter", AWS Architecture Blog, 2015).
    """
    if attempts < 1:
        raise ValueError(f"attempts {attempts}: expected >= 1")
    exponent = min(attempts - 1, 64)  # 2**64 times any base is past every sensible cap
    d = min(settings.delivery_backoff_max_s, settings.delivery_backoff_s * 2.0**exponent)
    u = (rng or random).random()
    return d / 2.0 + u * d / 2.0


@dataclass
class DispatchSummary:
    """What one :func:`dispatch_once` did."""

    claimed: int = 0
    delivered: int = 0
    retried: int = 0
    dead: int = 0


def _claim(engine: Engine, settings: Settings, now: datetime) -> Delivery | None:
    """Claim the most overdue pending message, or None; dead-letter exhausted ones."""
    lease = timedelta(seconds=LEASE_TIMEOUTS * settings.delivery_timeout_s)
    while True:
        with session_scope(engine) as session:
            stmt = (
                select(OutboxMessage)
                .where(OutboxMessage.status == PENDING, OutboxMessage.next_attempt_at <= now)
                .order_by(OutboxMessage.next_attempt_at, OutboxMessage.id)
                .limit(1)
                .with_for_update(skip_locked=True)  # PostgreSQL; SQLite renders nothing
            )
            msg = session.scalars(stmt).first()
            if msg is None:
                return None
            seen = msg.attempts
            if seen >= settings.delivery_max_attempts:
                session.execute(
                    update(OutboxMessage)
                    .where(OutboxMessage.id == msg.id, OutboxMessage.attempts == seen,
                           OutboxMessage.status == PENDING)
                    .values(status=DEAD, last_error=(
                        f"attempt {seen} of {settings.delivery_max_attempts} recorded no "
                        "outcome (dispatcher stopped?)"
                        + (f"; before: {msg.last_error}" if msg.last_error else "")))
                )
                continue
            claimed = session.execute(
                update(OutboxMessage)
                .where(OutboxMessage.id == msg.id, OutboxMessage.attempts == seen,
                       OutboxMessage.status == PENDING)
                .values(attempts=seen + 1, next_attempt_at=now + lease)
                .execution_options(synchronize_session=False)
            ).rowcount
            if claimed != 1:
                continue  # another dispatcher took it between read and update
            return Delivery(
                message_id=msg.id, idempotency_key=msg.idempotency_key, event=msg.event,
                channel=msg.channel, target=msg.target, payload=dict(msg.payload),
                attempt=seen + 1,
            )


def _record(engine: Engine, settings: Settings, delivery: Delivery, result: DeliveryResult,
            now: datetime, rng: random.Random | None) -> str:
    """Store the outcome of a claimed attempt; return the new status word."""
    attempt = delivery.attempt
    guard = (OutboxMessage.id == delivery.message_id, OutboxMessage.status == PENDING)
    if result.ok:
        values: dict[str, Any] = {"status": DELIVERED, "delivered_at": now}
        outcome = "delivered"
        where = guard  # delivered is delivered, even if a lease ran out meanwhile
    else:
        error = f"attempt {attempt}: {result.error or 'failed'}"
        where = (*guard, OutboxMessage.attempts == attempt)  # not if re-claimed since
        if result.permanent or attempt >= settings.delivery_max_attempts:
            values = {"status": DEAD, "last_error": error}
            outcome = "dead"
        else:
            delay = backoff_delay(attempt, settings, rng)
            if result.retry_after is not None:
                delay = max(delay, min(result.retry_after, settings.delivery_backoff_max_s))
            values = {"last_error": error, "next_attempt_at": now + timedelta(seconds=delay)}
            outcome = "retried"
    with session_scope(engine) as session:
        session.execute(update(OutboxMessage).where(*where).values(**values)
                        .execution_options(synchronize_session=False))
    return outcome


def dispatch_once(
    engine: Engine,
    settings: Settings,
    *,
    now: datetime | None = None,
    senders: Mapping[str, Sender] | None = None,
    limit: int = 100,
    rng: random.Random | None = None,
) -> DispatchSummary:
    """Claim, send and record up to ``limit`` due pending messages, one at a time.

    Parameters
    ----------
    engine : Engine
    settings : Settings
        Delivery settings (attempts, backoff, timeout, webhook secret).
    now : datetime, optional
        Fixed instant (UTC) for "due", leases and backoff (tests); the clock by default.
    senders : mapping, optional
        Sender per channel; :func:`jobs.hooks.default_senders` by default.
    limit : int
        Most messages handled in this call.
    rng : random.Random, optional
        Source of the backoff jitter.

    Returns
    -------
    DispatchSummary
    """
    chosen = dict(default_senders() if senders is None else senders)
    summary = DispatchSummary()
    while summary.claimed < limit:
        delivery = _claim(engine, settings, now or utc_now())
        if delivery is None:
            break
        summary.claimed += 1
        sender = chosen.get(delivery.channel)
        if sender is None:
            result = DeliveryResult(ok=False, permanent=True,
                                    error=f"no sender for channel {delivery.channel!r}")
        else:
            try:
                result = sender(delivery, settings)
            except Exception as exc:  # a sender bug must not stop the other messages
                log.exception("outbox message %d: sender failed", delivery.message_id)
                result = DeliveryResult(ok=False, error=f"{type(exc).__name__}: {exc}")
        outcome = _record(engine, settings, delivery, result, now or utc_now(), rng)
        setattr(summary, outcome, getattr(summary, outcome) + 1)
        log.info("outbox message %d (%s %s) attempt %d: %s%s", delivery.message_id,
                 delivery.channel, delivery.target, delivery.attempt, outcome,
                 "" if result.ok else f" ({result.error})")
    return summary


def dispatch_forever(
    engine: Engine,
    settings: Settings,
    *,
    stop: threading.Event,
    poll_s: float = 1.0,
    senders: Mapping[str, Sender] | None = None,
    limit: int = 100,
) -> None:
    """Dispatch until ``stop`` is set: at once while messages are due, else every ``poll_s``.

    A failing database (unreachable, locked) is logged and retried with the delivery
    backoff; the loop ends only through ``stop``.

    Parameters
    ----------
    engine : Engine
    settings : Settings
    stop : threading.Event
        Set it (e.g. from a signal handler) to end the loop after the current message.
    poll_s : float [s]
        Wait between polls when nothing is due.
    senders : mapping, optional
        Sender per channel.
    limit : int
        Messages per :func:`dispatch_once`.
    """
    failures = 0
    while not stop.is_set():
        try:
            summary = dispatch_once(engine, settings, senders=senders, limit=limit)
        except Exception:
            failures += 1
            log.exception("outbox dispatch failed (%d in a row)", failures)
            stop.wait(backoff_delay(failures, settings))
            continue
        failures = 0
        if summary.claimed < limit:
            stop.wait(poll_s)


def dead_letters(session: Session) -> list[OutboxMessage]:
    """The dead messages, oldest first, with their attempts and last error."""
    stmt = select(OutboxMessage).where(OutboxMessage.status == DEAD).order_by(OutboxMessage.id)
    return list(session.scalars(stmt))


def resend(session: Session, message_id: int, *, now: datetime | None = None) -> OutboxMessage:
    """Put a dead letter back to pending, due now, attempts reset, same idempotency key.

    The change is part of the caller's transaction. ``last_error`` is kept until the next
    attempt replaces it.

    Raises
    ------
    LookupError
        If there is no such message.
    ValueError
        If the message is not dead (pending ones are already retried; delivered ones
        would be dropped as repeats by their key).
    """
    msg = session.get(OutboxMessage, message_id)
    if msg is None:
        raise LookupError(f"outbox message {message_id}: no such message")
    if msg.status != DEAD:
        raise ValueError(f"outbox message {message_id} is {msg.status}: only dead letters "
                         "are re-sent")
    msg.status = PENDING
    msg.attempts = 0
    msg.next_attempt_at = now or utc_now()
    session.flush()
    return msg
