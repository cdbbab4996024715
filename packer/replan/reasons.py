"""Why each plate of a replan is new or changed, in words (changes.md and plan.json's reasons)."""

from __future__ import annotations

from packer.replan.state import PlateState, Situation

__all__ = ["why_changed"]

_CRITERIA = ("lateness", "untouched plates", "finish", "plates", "starts moved")


def why_changed(best, base, baseline, sit: Situation) -> dict:
    """Per plate of ``best`` (by index) that is new or changed: why, in words.

    ``best`` and ``base`` are :class:`~packer.replan.sequence.Sequenced` plans (the kept one
    and the stable one), ``baseline`` the (plates, rank) of the plan that disturbs least.

    A plate changed only by the events (it has the same printer and start in the plan
    that disturbs least) says which event; one the winning plan changed says on which
    criterion that plan beat the least disturbing one (lateness, finish, plates).
    """
    old = {p.id: p for p in sit.planned if p.id}
    ref_plates, ref_rank = baseline
    ref = {p.id: p for p in ref_plates if p.id}

    def beat(a, b) -> str:
        if b is None:
            return "lateness"
        return next((c for c, x, y in zip(_CRITERIA, a, b) if x < y), "an equal rank")

    out = {}
    for k, p in enumerate(best.plates):
        src = old.get(p.id)
        if p.origin == "new":
            out[k] = "new: copies that needed a plate"
        elif p.origin.startswith("moved:"):
            out[k] = f"moved to {p.printer} (another profile) and nested again, for {beat(best.rank, base.rank)}"
        elif p.origin.startswith("renested:"):
            out[k] = "lost cancelled copies; nested again to take waiting copies or finish sooner"
        elif p.origin.startswith("shrunk:"):
            out[k] = "lost cancelled copies; the rest kept where it was"
        elif src is not None and (src.printer != p.printer or abs((src.start - p.start).total_seconds()) >= 60):
            b = ref.get(p.id)
            if b is not None and b.printer == p.printer and abs((b.start - p.start).total_seconds()) < 60:
                out[k] = "events: " + _event_reason(src, p, sit)
            else:
                what = f"moved to {p.printer}" if src.printer != p.printer else "start moved"
                out[k] = f"{what}, for {beat(best.rank, ref_rank)}"
    return out


def _event_reason(src: PlateState, p: PlateState, sit: Situation) -> str:
    """Why a plate kept on its printer in its order starts at another time."""
    if any(d.printer == p.printer for d in sit.down):
        return f"{p.printer} is down for a while"
    if p.start > src.start:
        return "the plates before it or now are later than planned"
    return "the plates before it ended or were removed earlier than planned"
