"""What happened since the plan was written: the events a replan applies.

Events come from the command line (``--failed P03``) or from a small YAML
events file (our own schema, below); both give the same dataclasses. Every
event carries ``origin``, the text that names where it came from (the option,
or ``file:line: events[2].failed``), so a problem found later against the plan
points back to it.

Events file::

    now: 2026-12-07T10:00          # optional; --now wins
    events:
      - failed: P03                # a plate failed
        at: 2026-12-07T09:40       # optional (default: now, or the plate's end if earlier)
        survived: [BL-1045/spring-clip/3]   # optional: copies that came out fine
      - finished: P01              # optional: at
      - printing: P07              # optional: since
        since: 2026-12-07T09:55
      - down: bench-a              # a printer takes no work from ... until ...
        from: 2026-12-07T09:00     # optional (default: now)
        until: 2026-12-07T14:00    # optional (default: for the rest of the plan)
      - added: rush-orders.yaml    # orders in the job-file schema, path from this file
      - cancelled: BL-1046

Times are the workshop's local time without a zone, like the job file.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

from packer.errors import InputError
from packer.intake.fields import Reader
from packer.intake.identity import CopyKey
from packer.intake.job import CANCELLED_COPIES
from packer.intake.source import key_path, load_yaml

__all__ = ["Failed", "Finished", "Printing", "Down", "Added", "Cancelled", "Event", "CopyKey",
           "parse_moment", "parse_copy", "event_from_option", "load_events", "describe", "event_to_dict"]

@dataclass(frozen=True)
class Failed:
    plate: str
    at: datetime | None = None             # when the printer stopped on it (default: now or its end)
    survived: tuple[CopyKey, ...] = ()     # copies that came out fine
    origin: str = ""


@dataclass(frozen=True)
class Finished:
    plate: str
    at: datetime | None = None             # print done (default: its planned end, or now if earlier)
    origin: str = ""


@dataclass(frozen=True)
class Printing:
    plate: str
    since: datetime | None = None          # started (default: its planned start, or now if later)
    origin: str = ""


@dataclass(frozen=True)
class Down:
    """A printer takes no work in ``[start, until)``; ``until`` None: for the rest of the plan."""

    printer: str
    start: datetime | None = None          # None: now
    until: datetime | None = None
    origin: str = ""


@dataclass(frozen=True)
class Added:
    """New orders. ``file`` is read by the caller, who fills ``orders`` and ``copies``."""

    file: Path | None
    origin: str = ""
    orders: tuple = ()                     # packer.intake.job.Order
    copies: tuple = ()                     # packer.fleet.planner.CopyRef, one per new copy


@dataclass(frozen=True)
class Cancelled:
    """An order cancelled; ``leftover``: what to do with its copies already printed or printing
    (``stock`` or ``scrap``; None: the job's ``rules.cancelled_copies``)."""

    order: str
    origin: str = ""
    leftover: str | None = None


Event = Failed | Finished | Printing | Down | Added | Cancelled

_KINDS = ("failed", "finished", "printing", "down", "added", "cancelled")
_EXTRA = {"failed": {"at", "survived"}, "finished": {"at"}, "printing": {"since"},
          "down": {"from", "until"}, "added": set(), "cancelled": {"copies"}}


def _moment_text(t: datetime | None) -> str:
    return t.strftime("%a %d %b %H:%M") if t else "now"


def describe(ev: Event) -> str:
    """One line of plain words for the change report."""
    def at(t: datetime | None, word: str = "at") -> str:
        return f" {word} {_moment_text(t)}" if t else ""
    if isinstance(ev, Failed):
        kept = f"; survived: {', '.join('/'.join(map(str, k)) for k in ev.survived)}" if ev.survived else ""
        return f"plate {ev.plate} failed{at(ev.at)}{kept}"
    if isinstance(ev, Finished):
        return f"plate {ev.plate} finished{at(ev.at)}"
    if isinstance(ev, Printing):
        return f"plate {ev.plate} printing{at(ev.since, 'since')}"
    if isinstance(ev, Down):
        until = f" until {_moment_text(ev.until)}" if ev.until else " for the rest of the plan"
        return f"printer {ev.printer} down from {_moment_text(ev.start)}{until}"
    if isinstance(ev, Added):
        return f"orders added: {', '.join(o.id for o in ev.orders) or '(none)'}" + \
            (f" from {ev.file.name}" if ev.file else "")
    return f"order {ev.order} cancelled" + (f" (printed copies: {ev.leftover})" if ev.leftover else "")


def _iso(t: datetime | None) -> str | None:
    return t.isoformat(timespec="seconds") if t else None


def event_to_dict(ev: Event) -> dict:
    """The event as plain JSON data (for plan.json)."""
    if isinstance(ev, Failed):
        return {"failed": ev.plate, "at": _iso(ev.at), "survived": ["/".join(map(str, k)) for k in ev.survived]}
    if isinstance(ev, Finished):
        return {"finished": ev.plate, "at": _iso(ev.at)}
    if isinstance(ev, Printing):
        return {"printing": ev.plate, "since": _iso(ev.since)}
    if isinstance(ev, Down):
        return {"down": ev.printer, "from": _iso(ev.start), "until": _iso(ev.until)}
    if isinstance(ev, Added):
        return {"added": [o.id for o in ev.orders], "file": str(ev.file) if ev.file else None}
    return {"cancelled": ev.order, "copies": ev.leftover}


def parse_moment(text: str, *, what: str) -> datetime:
    """A date and time like ``2026-12-07T15:10`` (a space instead of ``T`` is fine)."""
    try:
        return datetime.fromisoformat(str(text).strip()).replace(tzinfo=None)
    except ValueError:
        raise InputError(f"{what}: '{text}' is not a date and time like 2026-12-07T15:10") from None


def parse_copy(text: str, *, what: str) -> CopyKey:
    """``ORDER/PART/COPY`` to a copy key."""
    bits = str(text).rsplit("/", 2)
    if len(bits) != 3 or not bits[0] or not bits[1] or not bits[2].isdigit() or int(bits[2]) < 1:
        raise InputError(f"{what}: '{text}' is not a copy named ORDER/PART/COPY (e.g. BL-1041/cable-clip/3)")
    return CopyKey(bits[0], bits[1], int(bits[2]))


def event_from_option(kind: str, value: str) -> Event:
    """One event from a command-line option (``kind`` without the dashes).

    ``failed``/``finished``: ``PLATE[@TIME]``; ``printing``: ``PLATE[@SINCE]``;
    ``down``: ``PRINTER[@FROM[..UNTIL]]``; ``added``: a file; ``cancelled``: ``ORDER[=stock|scrap]``.
    """
    origin = f"--{kind} {value}"
    name, _, when = str(value).partition("@")
    if not name.strip():
        raise InputError(f"{origin}: names nothing")
    name = name.strip()
    if kind == "failed":
        return Failed(name, parse_moment(when, what=origin) if when else None, origin=origin)
    if kind == "finished":
        return Finished(name, parse_moment(when, what=origin) if when else None, origin=origin)
    if kind == "printing":
        return Printing(name, parse_moment(when, what=origin) if when else None, origin=origin)
    if kind == "down":
        a, sep, b = when.partition("..")
        start = parse_moment(a, what=origin) if a else None
        until = parse_moment(b, what=origin) if b else None
        if sep and not b:
            raise InputError(f"{origin}: nothing after '..'; give PRINTER@FROM..UNTIL or PRINTER@FROM")
        return Down(name, start, until, origin=origin)
    if kind == "added":
        return Added(Path(value), origin=origin)
    if kind == "cancelled":
        order, _, what = value.partition("=")
        if what and what.strip() not in CANCELLED_COPIES:
            raise InputError(f"{origin}: after '=' give {' or '.join(CANCELLED_COPIES)} (what to do with its "
                             f"printed copies), got '{what}'")
        return Cancelled(order.strip(), origin=origin, leftover=what.strip() or None)
    raise InputError(f"unknown event kind '{kind}'; known: {', '.join(_KINDS)}")


def load_events(path: str | Path) -> tuple[datetime | None, list[Event]]:
    """Read an events file; every problem is reported at once with file, line and key.

    Returns
    -------
    (now or None, events in file order)

    Raises
    ------
    InputError
        Listing every problem in the file.
    """
    path = Path(path)
    doc = load_yaml(path)
    r = Reader(doc)
    top = r.mapping(doc.data, "", allowed={"now", "events"}, required={"events"})
    if top is None:
        raise InputError("\n".join(map(str, r.problems)))
    now = r.moment(top, "now", "", None)
    raw = top.get("events")
    events: list[Event] = []
    if not isinstance(raw, list):
        r.report("events", "must be a list of events (failed, finished, printing, down, added, cancelled)")
        raw = []
    for i, item in enumerate(raw):
        where = key_path("events", i)
        if not isinstance(item, dict):
            r.report(where, "must be a mapping like {failed: P03}")
            continue
        kinds = [k for k in item if k in _KINDS]
        if len(kinds) != 1:
            r.report(where, f"must name exactly one of: {', '.join(_KINDS)}; got {', '.join(map(str, item)) or 'nothing'}")
            continue
        kind = kinds[0]
        m = r.mapping(item, where, allowed={kind} | _EXTRA[kind])
        name = r.text(m, kind, where)
        if name is None:
            continue
        at_line = doc.line_of(key_path(where, kind))
        origin = f"{path}:{at_line}: {key_path(where, kind)}"
        if kind == "failed":
            survived = []
            got = m.get("survived", [])
            if not isinstance(got, list):
                r.report(key_path(where, "survived"), "must be a list of copies ORDER/PART/COPY")
                got = []
            for j, text in enumerate(got):
                try:
                    survived.append(parse_copy(text, what="copy"))
                except InputError as exc:
                    r.report(key_path(key_path(where, "survived"), j), str(exc).split(": ", 1)[1])
            events.append(Failed(name, r.moment(m, "at", where, None), tuple(survived), origin=origin))
        elif kind == "finished":
            events.append(Finished(name, r.moment(m, "at", where, None), origin=origin))
        elif kind == "printing":
            events.append(Printing(name, r.moment(m, "since", where, None), origin=origin))
        elif kind == "down":
            start, until = r.moment(m, "from", where, None), r.moment(m, "until", where, None)
            if start and until and until <= start:
                r.report(key_path(where, "until"), "must be later than 'from'")
                continue
            events.append(Down(name, start, until, origin=origin))
        elif kind == "added":
            events.append(Added((path.parent / name).resolve(), origin=origin))
        else:
            events.append(Cancelled(name, origin=origin,
                                    leftover=r.choice(m, "copies", where, CANCELLED_COPIES, None)))
    if r.problems:
        raise InputError("\n".join(map(str, r.problems)))
    return now, events
