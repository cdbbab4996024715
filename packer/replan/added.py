"""Orders added by a replan: an orders file in the job-file schema.

The file holds ``orders:`` exactly as a job file does (id, due, priority,
lines with mesh, quantity, material, rotations, orientation); mesh paths
resolve from the file's folder. Problems are reported with file, line and key.
"""

from __future__ import annotations

from pathlib import Path

from packer.errors import InputError
from packer.intake.fields import Reader
from packer.intake.job import Job, Order, check_materials, read_orders
from packer.intake.source import load_yaml

__all__ = ["read_added_orders"]


def read_added_orders(path: Path, job: Job) -> tuple[tuple[Order, ...], tuple[str, ...]]:
    """Orders of an added-orders file, checked against the job's fleet.

    Returns
    -------
    (orders, problems)
        Line problems (a missing mesh, a material no printer runs) do not stop
        the replan: those lines' copies are listed as unplaced with the reason.

    Raises
    ------
    InputError
        If the file cannot be read or holds no usable order, or an order id is
        already in the job.
    """
    path = Path(path)
    doc = load_yaml(path)
    r = Reader(doc)
    top = r.mapping(doc.data, "", allowed={"orders", "notes"}, required={"orders"})
    if top is None:
        raise InputError("\n".join(map(str, r.problems)))
    orders = check_materials(r, read_orders(r, top.get("orders"), path.parent), job.fleet)
    known = {o.id for o in job.orders}
    for i, raw in enumerate(top.get("orders") if isinstance(top.get("orders"), list) else []):
        if isinstance(raw, dict) and str(raw.get("id")) in known:
            r.report(f"orders[{i}].id", f"order {raw['id']} is already in the plan")
    fatal = [p for p in r.problems if "mesh" not in p.where and "material" not in p.where]
    if fatal or not orders:
        raise InputError("\n".join(map(str, r.problems)) or f"{path}: no usable order")
    return orders, tuple(map(str, r.problems))

