"""The audit store: record runs, grant and revoke waivers, query history and breaches."""

from __future__ import annotations

import contextlib
from collections.abc import Callable
from dataclasses import dataclass
from datetime import UTC, date, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from sqlalchemy import func, select

from accuracy_checks.results import RunReport
from accuracy_checks.store import queries
from accuracy_checks.store import waivers as W
from accuracy_checks.store.database import Database, StoreError
from accuracy_checks.store.record import (
    RESULT_FIELDS,
    RUN_FIELDS,
    chain_digest,
    insert_results,
    os_user,
    result_rows,
    run_row,
    tool_version,
)
from accuracy_checks.store.schema import (
    SCHEMA_VERSION,
    current_version,
    ensure_schema,
    results,
    runs,
)
from accuracy_checks.store.urls import default_store_url

if TYPE_CHECKING:
    from accuracy_checks.config import Config
    from accuracy_checks.store.archive import StagedSnapshot
    from accuracy_checks.store.remote_archive import RemoteStaged


@dataclass(frozen=True)
class RecordedRun:
    """Where a run was recorded: its attempt of the cycle and its snapshot, if any."""

    run_id: str
    cycle: str | None
    attempt: int | None
    #: the snapshot's file, or its object's URL as shown (object storage)
    snapshot: Path | str | None
    #: unrecorded snapshots of killed runs moved to ``<archive>/.orphans``
    retired: tuple[Path | str, ...] = ()


def archived_attempts(target: Config | str) -> dict[str, int] | None:
    """The last snapshot of each cycle as the audit store records it: cycle → the highest
    attempt recorded with a snapshot (runs recorded without one, dry runs, are not counted).

    ``None`` when there is no store yet (an SQLite file that does not exist, or a database
    without our tables): the archive folder is then all there is. Reads only; creates and
    upgrades nothing. Raises :class:`StoreError` when the store cannot be read.
    """
    from accuracy_checks.store.urls import sqlite_file

    url = target if isinstance(target, str) else default_store_url(target)
    db_file = sqlite_file(url)
    if db_file is not None and not db_file.is_file():
        return None
    db = Database(url, create=False)
    try:
        with db.read() as conn:
            if current_version(conn) == 0:
                return None
            return queries.archived_attempts(conn)
    finally:
        db.dispose()


def open_store(target: Config | str, *, create: bool = True) -> Store:
    """The audit store of a config (its ``store`` URL, default ``audit.db`` next to the
    archive), or of a SQLAlchemy URL. Creates or upgrades the tables as needed.

    ``create=False`` refuses to create a new SQLite file (for read-only commands).
    """
    url = target if isinstance(target, str) else default_store_url(target)
    return Store(url, create=create)


class Store:
    """One audit store (SQLite file or PostgreSQL database). See the package docstring."""

    def __init__(self, url: str, *, create: bool = True) -> None:
        self.db = Database(url, create=create)
        self._ensure_schema()

    @property
    def url(self) -> str:
        """The store's URL with its password masked (safe to print)."""
        return self.db.display_url

    @property
    def dialect(self) -> str:
        return self.db.dialect

    def __repr__(self) -> str:
        return f"Store({self.url!r})"

    def close(self) -> None:
        self.db.dispose()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _ensure_schema(self) -> None:
        with self.db.read() as conn:
            version = current_version(conn)
        if version == SCHEMA_VERSION:
            return
        with self.db.write() as conn:
            try:
                ensure_schema(conn, tool_version())
            except RuntimeError as exc:
                raise StoreError(
                    f"The audit store {self.url} cannot be used by accuracy-checks "
                    f"{tool_version()} (schema version {SCHEMA_VERSION}): {exc}. Upgrade "
                    "accuracy-checks, or point `store:` at a database of its own."
                ) from None

    @property
    def schema_version(self) -> int:
        with self.db.read() as conn:
            return current_version(conn)

    # ------------------------------------------------------------------------- recording

    def record_run(self, report: RunReport, *, config: Config | None = None,
                   fingerprints: dict[str, Any] | None = None,
                   snapshot: StagedSnapshot | RemoteStaged | None = None,
                   archive: object = None,
                   progress: Callable[[str], None] | None = None) -> RecordedRun:
        """Record ``report`` and its results in one transaction (all or nothing).

        The store allocates the run's attempt (the cycle's highest recorded attempt + 1,
        under the write lock) and sets ``report.attempt`` and ``report.snapshot``. With a
        staged ``snapshot`` it becomes ``attempt-N`` in the archive inside the transaction
        (protocol in :mod:`accuracy_checks.store.archive`); with ``config`` but no snapshot,
        unrecorded snapshots numbered N or above are still moved aside, so the archive never
        holds a number that the store gives to another run. ``fingerprints`` (see
        :func:`~accuracy_checks.store.fingerprints.input_fingerprints`) default to
        ``report.inputs``. ``archive`` is the archive folder or URL (default
        ``config.archive``; ``snapshot.root`` when only a snapshot is given). Raises
        :class:`StoreError` when the store cannot be written; then nothing is recorded and the
        staged snapshot is removed.

        On object storage the transaction only claims the attempt; the final object is
        written after the commit (:meth:`RemoteStaged.publish
        <accuracy_checks.store.remote_archive.RemoteStaged.publish>`). If that upload fails,
        the run stays recorded, ``progress`` says so, and the next run finishes the upload
        (:meth:`finish_snapshots`).
        """
        recorded_at = datetime.now(UTC)
        rows = result_rows(report.results)
        run = run_row(report, config=config, fingerprints=fingerprints,
                      recorded_at=recorded_at, rows=rows)
        root = archive if archive is not None else (
            config.archive if config is not None else
            snapshot.root if snapshot is not None else None)
        folder = None
        if root is not None and report.cycle is not None:
            from accuracy_checks.store.remote_archive import open_archive

            folder = open_archive(root)
        if snapshot is not None and snapshot.cycle != report.cycle:
            snapshot.discard()
            raise ValueError(f"snapshot of cycle {snapshot.cycle} for a run of {report.cycle}")
        placed: Path | str | None = None
        retired: list[Any] = []
        try:
            with self.db.write() as conn:
                attempt = None
                if report.cycle is not None:
                    last = conn.execute(
                        select(func.max(runs.c.attempt)).where(runs.c.cycle == report.cycle)
                    ).scalar()
                    attempt = int(last or 0) + 1
                    if folder is not None:
                        retired = folder.retire_unrecorded(report.cycle, attempt)
                    if snapshot is not None:
                        placed = snapshot.place(attempt, run_id=report.run_id)
                run["attempt"] = attempt
                run["snapshot"] = str(placed) if placed is not None else None
                previous = conn.execute(
                    select(runs.c.digest).where(runs.c.digest.is_not(None))
                    .order_by(runs.c.id.desc()).limit(1)
                ).scalar()
                run["digest"] = chain_digest(previous, run, rows)
                inserted = conn.execute(runs.insert().values(**run)).inserted_primary_key
                pk = int(inserted[0]) if inserted is not None else 0
                insert_results(conn, pk, rows)
        except BaseException:
            if placed is not None and folder is not None and report.cycle is not None:
                # the record did not commit: the placed file must not keep the number
                # (if that fails too, the next run of the cycle moves it aside)
                with contextlib.suppress(Exception):
                    folder.retire_unrecorded(report.cycle, int(run["attempt"]))
            if placed is not None and snapshot is not None:
                snapshot.discard()  # object storage: the staged object and its claim
            raise
        finally:
            if snapshot is not None and placed is None:
                snapshot.discard()
        report.attempt = attempt
        report.snapshot = str(placed) if placed is not None else None
        if snapshot is not None and placed is not None:
            from accuracy_checks.store.archive import ArchiveError

            try:
                snapshot.publish()
            except ArchiveError as exc:
                if progress:
                    progress(f"the run is recorded, but its snapshot {placed} could not be "
                             f"written yet ({exc}); the next run writes it from the staged "
                             "copy")
        if progress and retired:
            progress(f"moved {len(retired)} unrecorded snapshot(s) of cycle {report.cycle} "
                     f"(left by interrupted runs) to {_folder_of(retired[0])}")
        return RecordedRun(report.run_id, report.cycle, attempt, placed, tuple(retired))

    def archived_attempts(self) -> dict[str, int]:
        """Cycle → its highest attempt recorded with a snapshot (see
        :func:`archived_attempts`)."""
        with self.db.read() as conn:
            return queries.archived_attempts(conn)

    def finish_snapshots(self, archive: object) -> list[Path | str]:
        """Write the final snapshot objects that runs killed between their commit and the
        upload left undone (object storage only; see
        :meth:`RemoteArchive.finish_pending
        <accuracy_checks.store.remote_archive.RemoteArchive.finish_pending>`): only for a run
        the store records, under that run's attempt. Returns the paths written."""
        from accuracy_checks.store.archive import archive_url
        from accuracy_checks.store.remote_archive import open_archive

        if archive_url(archive) is None:
            return []  # on disk the rename happened inside the transaction
        folder = open_archive(archive)
        with self.db.read() as conn:
            recorded = {(str(c), int(a)): str(r) for r, c, a in conn.execute(
                select(runs.c.run_id, runs.c.cycle, runs.c.attempt)
                .where(runs.c.snapshot.is_not(None), runs.c.cycle.is_not(None)))}
        return list(folder.finish_pending(
            lambda run_id, cycle, attempt: recorded.get((cycle, attempt)) == run_id))

    def retire_orphans(self, archive: object) -> list[Path | str]:
        """Move aside every snapshot in ``archive`` numbered above its cycle's last recorded
        attempt: left by runs killed before their record committed, so that no later run
        measures accuracy on an unrecorded snapshot. Cycles with no recorded run are left
        alone (their snapshots may predate the store). Returns where the files went."""
        from accuracy_checks.store.archive import Archive
        from accuracy_checks.store.remote_archive import open_archive

        folder = open_archive(archive)
        if type(folder) is Archive and not folder.root.is_dir():
            return []
        moved: list[Path | str] = []
        with self.db.write() as conn:
            last = dict(conn.execute(
                select(runs.c.cycle, func.max(runs.c.attempt))
                .where(runs.c.cycle.is_not(None)).group_by(runs.c.cycle)).all())
            for snap in folder.snapshots():
                top = last.get(snap.cycle)
                if top is not None and snap.attempt > top:
                    moved += folder.retire_unrecorded(snap.cycle, int(top) + 1)
        return moved

    # --------------------------------------------------------------------------- waivers

    def waive(self, *, segment: str, measure: str, until: date, reason: str,
              by: str | None = None, lag: int | None = None,
              today: date | None = None) -> W.Waiver:
        """Grant a waiver of ``segment`` × ``measure`` (× ``lag``) through ``until`` (UTC,
        inclusive). Raises :class:`StoreError` for a past ``until``, an empty reason, an
        unknown measure or a lag below 1."""
        from accuracy_checks.config import did_you_mean as _did_you_mean
        from accuracy_checks.measures.catalogue import measure_directions

        now = datetime.now(UTC)
        today = today or now.date()
        known = measure_directions()
        if measure not in known:
            raise StoreError(f"Cannot waive unknown measure {measure!r}"
                             f"{_did_you_mean(measure, known)}; measures: "
                             f"{', '.join(sorted(known))}.")
        if until < today:
            raise StoreError(f"The waiver would end on {until.isoformat()}, before today "
                             f"({today.isoformat()}, UTC): give a later --until date.")
        if not reason.strip():
            raise StoreError("A waiver needs a reason (--reason): say why the breach is "
                             "accepted, for whoever reads the audit trail later.")
        if lag is not None and lag < 1:
            raise StoreError(f"--lag starts at 1 (the first period a cycle forecasts); "
                             f"got {lag}.")
        with self.db.write() as conn:
            wid = W.insert_waiver(conn, segment=segment, measure=measure, lag=lag,
                                  until=until, reason=reason.strip(), by=by or os_user(),
                                  at=now)
        return self.waiver(wid)

    def revoke(self, waiver_id: int, *, reason: str, by: str | None = None) -> W.Waiver:
        """Revoke a waiver from now on (recorded as a row of its own)."""
        if not reason.strip():
            raise StoreError("Revoking a waiver needs a reason (--reason).")
        with self.db.write() as conn:
            found = {w.id: w for w in W.load_waivers(conn)}
            if waiver_id not in found:
                raise StoreError(f"There is no waiver #{waiver_id} in {self.url}; "
                                 "`accuracy-checks waivers --all` lists them.")
            if found[waiver_id].revoked_at is not None:
                w = found[waiver_id]
                raise StoreError(f"Waiver #{waiver_id} was already revoked by {w.revoked_by} "
                                 f"on {w.revoked_at:%Y-%m-%d %H:%M} UTC.")
            W.insert_revocation(conn, waiver_id=waiver_id, reason=reason.strip(),
                                by=by or os_user(), at=datetime.now(UTC))
        return self.waiver(waiver_id)

    def waiver(self, waiver_id: int) -> W.Waiver:
        for w in self.waivers(include_inactive=True):
            if w.id == waiver_id:
                return w
        raise StoreError(f"There is no waiver #{waiver_id} in {self.url}.")

    def waivers(self, *, include_inactive: bool = False,
                on: date | datetime | None = None) -> list[W.Waiver]:
        """Waivers active ``on`` (default now); with ``include_inactive`` every waiver ever
        granted (expired, revoked and not yet started too)."""
        with self.db.read() as conn:
            every = W.load_waivers(conn)
        if include_inactive:
            return every
        return [w for w in every if w.state(on) == "active"]

    def active_waivers(self, on: date | datetime | None = None) -> list[W.Waiver]:
        """The waivers that apply to a run on ``on`` (a UTC date or an instant; default now)."""
        return self.waivers(on=on)

    def segment_seen(self, segment: str) -> bool:
        """Whether any recorded result names ``segment``."""
        with self.db.read() as conn:
            return conn.execute(
                select(results.c.id).where(results.c.segment == segment).limit(1)
            ).first() is not None

    # --------------------------------------------------------------------------- queries

    def history(self, **filters: Any) -> list[dict[str, Any]]:
        """Recorded runs; see :func:`accuracy_checks.store.queries.history` for filters."""
        with self.db.read() as conn:
            return queries.history(conn, **filters)

    def breaches(self, *, segment: str | None = None, measure: str | None = None,
                 on: date | datetime | None = None) -> list[dict[str, Any]]:
        """Figures breached now (see :func:`accuracy_checks.store.queries.breaches`), each
        with ``waiver``: the waiver active ``on`` (default now) that covers it, if any."""
        from accuracy_checks.results import CheckResult

        with self.db.read() as conn:
            found = queries.breaches(conn, segment=segment, measure=measure)
            active = [w for w in W.load_waivers(conn) if w.state(on) == "active"]
        for b in found:
            probe = CheckResult(b["check"], "fail", segment=b["segment"], lag=b["lag"],
                                measure=b["measure"])
            w = W.pick(active, probe)
            b["waiver"] = w.to_dict(on) if w is not None else None
        return found

    def results_of(self, run_id: str) -> list[dict[str, Any]]:
        """Every stored result of one run, in report order."""
        with self.db.read() as conn:
            pk = conn.execute(select(runs.c.id).where(runs.c.run_id == run_id)).scalar()
            if pk is None:
                return []
            rows = conn.execute(select(results).where(results.c.run_pk == pk)
                                .order_by(results.c.seq)).mappings()
            return [queries.result_dict(r) for r in rows]

    # ------------------------------------------------------------------------ tamper check

    def verify(self) -> list[str]:
        """Recompute the digest chain; return one line per run whose record does not match
        (empty: every chained run is as recorded). Runs from before schema 2 carry no
        digest and are skipped."""
        problems = []
        previous: str | None = None
        with self.db.read() as conn:
            for run in conn.execute(select(runs).order_by(runs.c.id)).mappings():
                if run["digest"] is None:
                    continue
                rows = conn.execute(
                    select(*(results.c[c] for c in RESULT_FIELDS))
                    .where(results.c.run_pk == run["id"]).order_by(results.c.seq)
                )
                fields = {k: run[k] for k in RUN_FIELDS}
                want = chain_digest(previous, fields, [_normal(r) for r in rows])
                if want != run["digest"]:
                    problems.append(f"run {run['run_id']} (cycle {run['cycle']}, attempt "
                                    f"{run['attempt']}): record or chain altered")
                previous = run["digest"]
        return problems


_VALUE = RESULT_FIELDS.index("value")


def _normal(row: Any) -> tuple[Any, ...]:
    out = list(row)
    if out[_VALUE] is not None:
        out[_VALUE] = float(out[_VALUE])
    return tuple(out)


def _folder_of(moved: Path | str) -> str:
    """The folder of a moved snapshot: a local path's parent, or a URL's prefix (object
    storage gives the moved objects as URLs, as shown)."""
    return str(moved.parent) if isinstance(moved, Path) else str(moved).rsplit("/", 1)[0]
