"""Waivers: a known breach of a segment × measure (optionally one lag), accepted until a date.

A team waives a breach it has understood (a promotion, a store closure) instead of switching a
check off. While a waiver is active, a ``warn`` or ``fail`` result of its segment and measure
(and lag, if the waiver names one) becomes ``waived``: it no longer moves the verdict, and its
message says who waived it, why and until when, in every output.

**Expiry**: a waiver applies through its ``until`` day inclusive, days counted in UTC: a run
that starts on or before ``until`` (UTC date) is covered, a run that starts the day after is
not. Nothing needs to be done for a waiver to expire. A revocation ends it at once.

Every waiver action is an audit row: granting adds a ``waivers`` row, revoking adds a
``waiver_revocations`` row; neither is ever edited or deleted.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Sequence
from datetime import UTC, date, datetime
from typing import Any

from sqlalchemy import Connection, select

from accuracy_checks.results import WAIVABLE, CheckResult
from accuracy_checks.store.schema import waiver_revocations, waivers


@dataclasses.dataclass(frozen=True)
class Waiver:
    """A waiver as granted, with its revocation if any."""

    id: int
    segment: str
    measure: str
    lag: int | None
    until: date
    reason: str
    created_by: str
    created_at: datetime
    revoked_at: datetime | None = None
    revoked_by: str | None = None
    revoke_reason: str | None = None

    def state(self, on: date | datetime | None = None) -> str:
        """``active``, ``expired``, ``revoked`` or ``pending`` (granted later than ``on``).

        ``on`` is a UTC date (the whole day) or an instant; default: now.

        >>> w = Waiver(1, "pet-care", "bias_pct", None, date(2026, 3, 31), "promo", "ana",
        ...            datetime(2026, 3, 2, 9, tzinfo=UTC))
        >>> w.state(date(2026, 3, 31)), w.state(date(2026, 4, 1)), w.state(date(2026, 3, 1))
        ('active', 'expired', 'pending')
        """
        day, instant = _day_and_instant(on)
        if self.revoked_at is not None and self.revoked_at <= instant:
            return "revoked"
        if day > self.until:
            return "expired"
        if self.created_at > instant:
            return "pending"
        return "active"

    def covers(self, result: CheckResult) -> bool:
        """Whether this waiver's segment, measure and lag match ``result``."""
        return (result.segment == self.segment and result.measure == self.measure
                and (self.lag is None or result.lag == self.lag))

    def describe(self) -> str:
        """One line: what, until when, by whom and why.

        >>> Waiver(3, "pet-care", "bias_pct", 1, date(2026, 3, 31), "spring promotion",
        ...        "ana", datetime(2026, 3, 2, tzinfo=UTC)).describe()
        'waiver #3 by ana until 2026-03-31 (UTC, inclusive): spring promotion'
        """
        return (f"waiver #{self.id} by {self.created_by} until {self.until.isoformat()} "
                f"(UTC, inclusive): {self.reason}")

    def to_dict(self, on: date | datetime | None = None) -> dict[str, Any]:
        """JSON-ready fields plus the ``state`` on ``on`` (default now)."""
        out = dataclasses.asdict(self)
        out["until"] = self.until.isoformat()
        for key in ("created_at", "revoked_at"):
            out[key] = out[key].isoformat() if out[key] is not None else None
        out["state"] = self.state(on)
        return out


def _day_and_instant(on: date | datetime | None) -> tuple[date, datetime]:
    if on is None:
        now = datetime.now(UTC)
        return now.date(), now
    if isinstance(on, datetime):
        instant = on if on.tzinfo else on.replace(tzinfo=UTC)
        instant = instant.astimezone(UTC)
        return instant.date(), instant
    # a whole UTC day: granted by its end, revoked only if before its start
    end = datetime(on.year, on.month, on.day, 23, 59, 59, 999999, tzinfo=UTC)
    return on, end


def pick(candidates: Iterable[Waiver], result: CheckResult) -> Waiver | None:
    """The waiver that applies to ``result``: one naming its lag beats one for every lag,
    then the latest ``until``, then the newest."""
    matching = [w for w in candidates if w.covers(result)]
    if not matching:
        return None
    return max(matching, key=lambda w: (w.lag is not None, w.until, w.id))


def apply_waivers(results: Sequence[CheckResult], active: Sequence[Waiver]) -> list[CheckResult]:
    """``results`` with each warn/fail result (:data:`~accuracy_checks.results.WAIVABLE`; a
    check error is never waived) covered by an active waiver set to ``waived``.

    The message starts with who waived it, until when and why; ``details["waiver"]`` holds
    the waiver (``id``, ``by``, ``until``, ``reason``) and ``details["waived_status"]`` the
    status it would have had. A loop over results (a few per segment), not over data rows.
    """
    if not active:
        return list(results)
    by_key: dict[tuple[str | None, str | None], list[Waiver]] = {}
    for granted in active:
        by_key.setdefault((granted.segment, granted.measure), []).append(granted)
    out = []
    for r in results:
        w = None
        if r.status in WAIVABLE and (r.segment, r.measure) in by_key:
            w = pick(by_key[(r.segment, r.measure)], r)
        if w is None:
            out.append(r)
            continue
        note = (f"Waived ({r.status} without it) by {w.created_by} until "
                f"{w.until.isoformat()}, waiver #{w.id}: {w.reason}.")
        out.append(dataclasses.replace(
            r, status="waived", message=f"{note} {r.message}".strip(),
            details={**r.details, "waived_status": r.status,
                     "waiver": {"id": w.id, "by": w.created_by, "until": w.until.isoformat(),
                                "reason": w.reason}},
        ))
    return out


# ------------------------------------------------------------------------------ database


def load_waivers(conn: Connection) -> list[Waiver]:
    """Every waiver ever granted, with its revocation, oldest first."""
    rows = conn.execute(
        select(waivers, waiver_revocations.c.revoked_at, waiver_revocations.c.revoked_by,
               waiver_revocations.c.reason.label("revoke_reason"))
        .outerjoin(waiver_revocations, waiver_revocations.c.waiver_id == waivers.c.id)
        .order_by(waivers.c.id)
    ).mappings()
    return [_waiver(row) for row in rows]


def _waiver(row: Any) -> Waiver:
    return Waiver(
        id=int(row["id"]), segment=row["segment"], measure=row["measure"],
        lag=None if row["lag"] is None else int(row["lag"]), until=_as_date(row["until"]),
        reason=row["reason"], created_by=row["created_by"],
        created_at=_utc(row["created_at"]), revoked_at=_utc_or_none(row["revoked_at"]),
        revoked_by=row["revoked_by"], revoke_reason=row["revoke_reason"],
    )


def _as_date(value: Any) -> date:
    if isinstance(value, datetime):
        return value.date()
    if isinstance(value, date):
        return value
    return date.fromisoformat(str(value))


def _utc(value: datetime) -> datetime:
    return value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)


def _utc_or_none(value: datetime | None) -> datetime | None:
    return None if value is None else _utc(value)


def insert_waiver(conn: Connection, *, segment: str, measure: str, lag: int | None,
                  until: date, reason: str, by: str, at: datetime) -> int:
    res = conn.execute(waivers.insert().values(
        segment=segment, measure=measure, lag=lag, until=until, reason=reason,
        created_by=by, created_at=at))
    return int(res.inserted_primary_key[0])  # type: ignore[index]


def insert_revocation(conn: Connection, *, waiver_id: int, reason: str, by: str,
                      at: datetime) -> None:
    conn.execute(waiver_revocations.insert().values(
        waiver_id=waiver_id, reason=reason, revoked_by=by, revoked_at=at))
