"""The audit-trail commands: ``history``, ``breaches``, ``waive``, ``waivers``, ``revoke``,
``verify``.

Each reads the store of a config (``--config FILE``: its ``store:``, default ``audit.db`` next
to the archive) or a store URL (``--store URL``). Tables are plain aligned text (never cut:
segment names show verbatim); ``--json`` and ``--csv`` are for machines. Exit codes: 0 done,
1 ``verify`` found an altered record, 2 unusable config, store or arguments.
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import sys
from collections.abc import Sequence
from datetime import UTC, date, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from accuracy_checks.store import Store

from accuracy_checks.results import DISPLAY_ORDER

COMMANDS = ("history", "breaches", "waive", "waivers", "revoke", "verify")
STATUSES = tuple(DISPLAY_ORDER)


def iso_day(text: str) -> date:
    """An argument's date (``YYYY-MM-DD``); argparse words the error."""
    try:
        return date.fromisoformat(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a date (YYYY-MM-DD)") from None


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number of at least 1")
    return value


def _store_args(p: argparse.ArgumentParser) -> None:
    where = p.add_mutually_exclusive_group(required=True)
    where.add_argument("--config", type=Path, help="the YAML config (its `store:`)")
    where.add_argument("--store", metavar="URL",
                       help="a store URL instead of a config (sqlite:///…, postgresql+psycopg://…)")


def _format_args(p: argparse.ArgumentParser) -> None:
    fmt = p.add_mutually_exclusive_group()
    fmt.add_argument("--json", action="store_true", help="print JSON")
    fmt.add_argument("--csv", action="store_true", help="print CSV")


def add_audit_commands(sub: Any) -> None:
    """Register the audit commands on the main parser's subparsers."""
    h = sub.add_parser("history", help="recorded runs, filterable (audit trail)")
    _store_args(h)
    h.add_argument("--cycle", help="one cycle (its issue date, e.g. 2026-03-02)")
    h.add_argument("--segment", help="runs with a result for this segment (\"*\" = all series)")
    h.add_argument("--measure", help="runs with a result for this measure (e.g. wape)")
    h.add_argument("--status", choices=STATUSES, help="runs with a result of this status")
    h.add_argument("--since", type=iso_day, metavar="DATE", help="started on or after (UTC date)")
    h.add_argument("--until", type=iso_day, metavar="DATE",
                   help="started on or before (UTC date)")
    h.add_argument("--label", help="runs recorded with this pipeline run label")
    h.add_argument("--limit", type=_positive, metavar="N", help="only the newest N runs")
    _format_args(h)

    b = sub.add_parser("breaches", help="figures breached now, since when, and their waivers")
    _store_args(b)
    b.add_argument("--segment", help="only this segment")
    b.add_argument("--measure", help="only this measure")
    _format_args(b)

    w = sub.add_parser("waive", help="accept a known breach until a date, with a reason")
    _store_args(w)
    w.add_argument("--segment", required=True, help='the segment ("*" = all series)')
    w.add_argument("--measure", required=True, help="the measure (e.g. bias_pct, wape)")
    w.add_argument("--lag", type=_positive, help="only this lag (default: every lag)")
    w.add_argument("--until", required=True, type=iso_day, metavar="DATE",
                   help="last day the waiver applies (UTC, inclusive)")
    w.add_argument("--reason", required=True, help="why the breach is accepted")
    w.add_argument("--by", help="who grants it (default: the OS user)")
    _format_args(w)

    ws = sub.add_parser("waivers", help="list waivers (active ones; --all for every one)")
    _store_args(ws)
    ws.add_argument("--all", action="store_true", help="expired and revoked waivers too")
    _format_args(ws)

    r = sub.add_parser("revoke", help="end a waiver now, with a reason")
    _store_args(r)
    r.add_argument("--id", required=True, type=int, help="the waiver's number")
    r.add_argument("--reason", required=True, help="why it is revoked")
    r.add_argument("--by", help="who revokes it (default: the OS user)")

    v = sub.add_parser("verify", help="check that no recorded run or result was altered")
    _store_args(v)


def run_audit_command(args: argparse.Namespace) -> int:
    """Run one audit command; return its exit code. Raises ``UsageError`` (exit 2)."""
    read_only = args.command in ("history", "breaches", "waivers", "verify")
    store = _open(args, create=not read_only)
    if store is None:  # a read-only command on an SQLite store that does not exist yet
        return _empty(args)
    with store:
        return _COMMANDS[args.command](store, args)


def _open(args: argparse.Namespace, *, create: bool) -> Store | None:
    from accuracy_checks.store import open_store
    from accuracy_checks.store.urls import default_store_url, sqlite_file

    if args.config is not None:
        from accuracy_checks.measures.catalogue import load_config

        url = default_store_url(load_config(args.config))
    else:
        url = args.store
    try:
        path = sqlite_file(url)
    except Exception:
        path = None  # open_store words the bad URL
    if not create and path is not None and not path.exists():
        return None
    return open_store(url, create=create)


def _empty(args: argparse.Namespace) -> int:
    if getattr(args, "json", False):
        print("[]")
    elif getattr(args, "csv", False):
        pass
    else:
        print("No run recorded yet: the audit store does not exist "
              "(it is created by the first `accuracy-checks run`).")
    return 0


# ------------------------------------------------------------------------------- history


def _history(store: Store, args: argparse.Namespace) -> int:
    runs = store.history(cycle=args.cycle, segment=args.segment, measure=args.measure,
                         status=args.status, since=args.since, until=args.until,
                         label=args.label, limit=args.limit)
    by_result = any(x is not None for x in (args.segment, args.measure, args.status))
    if by_result:
        head = ["run_id", "cycle", "attempt", "started_at", "run_status", "check", "segment",
                "lag", "measure", "value", "unit", "status", "warn", "fail", "waiver_id"]
        rows = [[run["run_id"], run["cycle"], run["attempt"], run["started_at"], run["status"],
                 r["check"], r["segment"], r["lag"], r["measure"], r["value"], r["unit"],
                 r["status"], r["warn"], r["fail"], r["waiver_id"]]
                for run in runs for r in run.get("results", [])]
    else:
        head = ["run_id", "cycle", "attempt", "status", "started_at", "finished_at", "label",
                "user", "host", "fail", "warn", "waived", "pass", "skipped", "error"]
        rows = [[run["run_id"], run["cycle"], run["attempt"], run["status"], run["started_at"],
                 run["finished_at"], run["label"], run["user"], run["host"],
                 *((run["counts"] or {}).get(s, 0)
                   for s in ("fail", "warn", "waived", "pass", "skipped", "error"))]
                for run in runs]
    if _print_for_machines(args, runs, head, rows):
        return 0
    if not runs:
        print(f"No recorded run matches (store {store.url}).")
        return 0
    if by_result:
        shown = [[r[0][:12], r[1], r[2], _when(r[3]), r[4], r[5], r[6], r[7], r[8],
                  _num(r[9], r[10]), r[11], _level(r[12]), _level(r[13]),
                  f"#{r[14]}" if r[14] else ""] for r in rows]
        _print_table(["run", "cycle", "attempt", "started (UTC)", "verdict", "check",
                      "segment", "lag", "measure", "value", "status", "warn", "fail",
                      "waiver"], shown)
    else:
        shown = [[r[0][:12], r[1], r[2], r[3].upper(), _when(r[4]), r[6] or "", r[7],
                  _counts(r[9:])] for r in rows]
        _print_table(["run", "cycle", "attempt", "verdict", "started (UTC)", "label", "user",
                      "results"], shown)
    print(f"{len(runs)} run(s) in {store.url}")
    return 0


def _counts(values: Sequence[Any]) -> str:
    names = (("failed", "failed"), ("warning", "warnings"), ("waived", "waived"),
             ("passed", "passed"), ("skipped", "skipped"), ("error", "errors"))
    return ", ".join(f"{v} {n[v != 1]}" for v, n in zip(values, names, strict=True) if v)


# ------------------------------------------------------------------------------ breaches


def _breaches(store: Store, args: argparse.Namespace) -> int:
    found = store.breaches(segment=args.segment, measure=args.measure)
    head = ["check", "segment", "lag", "measure", "status", "first_cycle", "cycles",
            "last_cycle", "last_attempt", "value", "unit", "warn", "fail", "waiver_id",
            "waiver_until", "waiver_by", "waiver_reason"]
    rows = [[b["check"], b["segment"], b["lag"], b["measure"], b["status"], b["first_cycle"],
             b["cycles"], b["last_cycle"], b["last_attempt"], b["value"], b["unit"], b["warn"],
             b["fail"], *(_waiver_cells(b["waiver"]))] for b in found]
    if _print_for_machines(args, found, head, rows):
        return 0
    if not found:
        print(f"No figure is breached in the latest recorded cycles (store {store.url}).")
        return 0
    shown = [[r[1], r[2], r[3], r[4], r[5], r[6], f"{r[7]} #{r[8]}", _num(r[9], r[10]),
              _level(r[11]), _level(r[12]),
              f"#{r[13]} until {r[14]} by {r[15]}: {r[16]}" if r[13] else ""]
             for r in rows]
    _print_table(["segment", "lag", "measure", "status", "since cycle", "cycles",
                  "last run", "last value", "warn", "fail", "waiver"], shown)
    print(f"{len(found)} breached figure(s); waived ones still count until fixed")
    return 0


def _waiver_cells(w: dict[str, Any] | None) -> list[Any]:
    if not w:
        return [None, None, None, None]
    return [w["id"], w["until"], w["created_by"], w["reason"]]


# ------------------------------------------------------------------------------- waivers


def _waive(store: Store, args: argparse.Namespace) -> int:
    if args.segment != "*" and not store.segment_seen(args.segment):
        print(f"note: no recorded result names segment {args.segment!r} yet; the waiver "
              "applies once it does (segment names are matched exactly).", file=sys.stderr)
    w = store.waive(segment=args.segment, measure=args.measure, lag=args.lag,
                    until=args.until, reason=args.reason, by=args.by)
    doc = w.to_dict()
    if not _print_for_machines(args, doc, list(doc), [list(doc.values())]):
        lag = f", lag {w.lag}" if w.lag is not None else ", every lag"
        print(f"Granted waiver #{w.id}: {w.segment} × {w.measure}{lag}, through "
              f"{w.until.isoformat()} (UTC, inclusive), by {w.created_by}: {w.reason}")
        print("Breaches it covers are reported as `waived` and no longer fail the gate.")
    return 0


def _waivers(store: Store, args: argparse.Namespace) -> int:
    today = datetime.now(UTC)
    found = store.waivers(include_inactive=args.all)
    docs = [w.to_dict(today) for w in found]
    head = ["id", "state", "segment", "measure", "lag", "until", "reason", "created_by",
            "created_at", "revoked_at", "revoked_by", "revoke_reason"]
    if _print_for_machines(args, docs, head, [[d[k] for k in head] for d in docs]):
        return 0
    if not found:
        more = "" if args.all else " (--all lists expired and revoked ones too)"
        print(f"No {'' if args.all else 'active '}waiver in {store.url}{more}.")
        return 0
    shown = [[f"#{d['id']}", d["state"], d["segment"], d["measure"],
              "all" if d["lag"] is None else d["lag"], d["until"], d["created_by"],
              _when(d["created_at"]), d["reason"]
              + (f" — revoked by {d['revoked_by']}: {d['revoke_reason']}"
                 if d["revoked_at"] else "")] for d in docs]
    _print_table(["waiver", "state", "segment", "measure", "lag", "until (UTC)", "by",
                  "granted (UTC)", "reason"], shown)
    return 0


def _revoke(store: Store, args: argparse.Namespace) -> int:
    w = store.revoke(args.id, reason=args.reason, by=args.by)
    print(f"Revoked waiver #{w.id} ({w.segment} × {w.measure}) as of "
          f"{w.revoked_at:%Y-%m-%d %H:%M} UTC, by {w.revoked_by}: {w.revoke_reason}")
    return 0


def _verify(store: Store, args: argparse.Namespace) -> int:
    problems = store.verify()
    if problems:
        for line in problems:
            print(f"ALTERED: {line}")
        print(f"{len(problems)} run record(s) in {store.url} do not match their digest.")
        return 1
    n = len(store.history())
    print(f"OK: {n} run record(s) in {store.url} match their digest chain.")
    return 0


_COMMANDS = {"history": _history, "breaches": _breaches, "waive": _waive,
             "waivers": _waivers, "revoke": _revoke, "verify": _verify}


# ------------------------------------------------------------------------------ rendering


def _when(iso_text: str | None) -> str:
    return "" if not iso_text else iso_text[:19].replace("T", " ")


def _num(value: float | None, unit: str | None) -> str:
    if value is None:
        return "—"
    text = f"{value:,.4g}" if abs(value) < 1e6 else f"{value:,.0f}"
    return f"{text} %" if unit == "%" else text


def _level(bound: Any) -> str:
    if bound is None:
        return ""
    if isinstance(bound, list):
        return f"[{bound[0]:g}, {bound[1]:g}]"
    return f"{bound:g}"


def _print_for_machines(args: argparse.Namespace, doc: Any, head: list[str],
                        rows: list[list[Any]]) -> bool:
    """Print ``doc`` as JSON (``--json``) or ``rows`` under ``head`` as CSV (``--csv``);
    whether it did (else the command prints its table)."""
    if args.json:
        print(json.dumps(doc, indent=2, ensure_ascii=False, default=str))
    elif args.csv:
        w = csv.writer(sys.stdout, lineterminator="\n")
        w.writerow(head)
        for row in rows:
            w.writerow([json.dumps(c) if isinstance(c, list | dict) else c for c in row])
    return bool(args.json or args.csv)


def _print_table(head: list[str], rows: list[list[Any]]) -> None:
    """Aligned columns; cells are never cut or interpreted (names show verbatim)."""
    cells = [[("" if c is None else str(c)).replace("\n", " ") for c in row] for row in rows]
    widths = [max([len(h), *(len(r[i]) for r in cells)]) for i, h in enumerate(head)]
    out = io.StringIO()
    out.write("  ".join(h.ljust(w) for h, w in zip(head, widths, strict=True)).rstrip() + "\n")
    for r in cells:
        out.write("  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip() + "\n")
    sys.stdout.write(out.getvalue())


__all__ = ["COMMANDS", "add_audit_commands", "iso_day", "run_audit_command"]
