"""The day split into components, and the same plan on every executor.

References: the component split is checked against graphs worked out by hand (and
against the demo job file, whose printers' materials show the split); the plans of
the process pool and of a Dask cluster are checked against the in-process plan of
the same job, seed and budget, the definition of "same plan" in issue 19.
"""

import shutil
from datetime import datetime
from pathlib import Path

import pytest

from packer.cli import main
from packer.errors import InputError, PackerError
from packer.fleet.records import CopyRef, copy_key
from packer.fleet.view import screen
from packer.intake.job import load_job
from packer.output.plan import plan_to_dict
from packer.pipeline import PlanSettings, catalog, expand_copies, intake, layout_service, plan_job
from packer.pipeline.components import budget_shares, split_components
from packer.pipeline.executor import DaskCluster, InProcess, ProcessPool, executor_for

ROOT = Path(__file__).resolve().parent.parent
PARTS = ROOT / "jobs" / "parts"


def _ref(k: int, material: str) -> CopyRef:
    return CopyRef("O-1", f"p{k}", 0, 0, material, datetime(2026, 12, 7, 17), 1)


def test_split_of_a_hand_checked_fleet():
    # printers 0..5; copies and the printers each may take (drawn by hand):
    #   c0 {0, 1}, c1 {1, 2}, c2 {3}, c3 {} (no printer), c4 {4}, c5 {3}; printer 5 takes nothing.
    # Components by hand: {0, 1, 2} with c0, c1 (joined through printer 1); {3} with c2, c5;
    # {4} with c4. c3 and printer 5 are in none. Order: most copies first, then first printer.
    cs = [_ref(k, "m") for k in range(6)]
    eligible = {copy_key(c): el for c, el in zip(cs, ([0, 1], [1, 2], [3], [], [4], [3]))}
    got = split_components(cs, eligible)
    assert [(g.printers, g.copies) for g in got] == [((0, 1, 2), (0, 1)), ((3,), (2, 5)), ((4,), (4,))]


def test_split_of_the_demo_follows_its_materials():
    # jobs/brindle-lane-day.yaml: bench-a runs PLA, bench-b PLA and PETG, round-c PETG (one
    # filament component through bench-b); vat-d the resin, cell-e the PA12: three components.
    job = load_job(ROOT / "jobs" / "brindle-lane-day.yaml")
    parts, failures = intake(job)
    copies, _, _ = expand_copies(job, parts, failures)
    table = catalog(copies, parts)
    refs = list(table.refs.values())
    printers = sorted(job.fleet, key=lambda p: p.name)
    eligible, unplaced = screen(refs, printers, layout_service(job, parts, table.kinds, seed=0))
    got = split_components(refs, eligible)
    assert not unplaced
    assert [{printers[i].name for i in g.printers} for g in got] == [{"bench-a", "bench-b", "round-c"},
                                                                     {"cell-e"}, {"vat-d"}]
    assert sorted(k for g in got for k in g.copies) == list(range(len(refs)))    # every copy once


def test_budget_shares_add_up_and_follow_the_copies():
    shares = budget_shares([300, 100, 0], 60.0)
    assert sum(shares) == pytest.approx(60.0)
    assert shares[0] > shares[1] > shares[2] > 0     # a component with no copy still gets its even part


def _job(tmp_path: Path) -> Path:
    """Three components: PLA on bench-a, PETG on bench-b, resin on vat-d (parts of the demo)."""
    folder = tmp_path / "job"
    (folder / "parts").mkdir(parents=True)
    for name in ("cable-clip.stl", "hose-ring.ply", "drawer-knob.obj"):
        shutil.copy(PARTS / name, folder / "parts" / name)
    text = (f"name: three-parts\nstart: 2026-12-07T07:00\nplates_folder: {ROOT / 'plates'}\n"
            "calendar:\n  shift: ['07:00', '19:00']\n  days: [mon, tue, wed, thu, fri]\n"
            "fleet:\n  - {name: bench-a, profile: fil-bench-244, materials: [PLA]}\n"
            "  - {name: bench-b, profile: fil-bench-244, materials: [PETG]}\n"
            "  - {name: vat-d, profile: resin-vat-176}\n"
            "orders:\n  - id: T-1\n    due: 2026-12-07T15:00\n    lines:\n"
            "      - {mesh: parts/cable-clip.stl, quantity: 8, material: PLA}\n"
            "      - {mesh: parts/drawer-knob.obj, quantity: 4, material: grey-resin}\n"
            "  - id: T-2\n    due: 2026-12-07T12:00\n    priority: 2\n    lines:\n"
            "      - {mesh: parts/hose-ring.ply, quantity: 4, material: PETG}\n")
    path = folder / "job.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def _plan_data(path: Path, executor, tmp_path: Path) -> dict:
    # the nesting engine's guard reads each process's own CPU time, so a loaded test
    # machine does not stop a layout call (the plan would then depend on the machine)
    settings = PlanSettings(seconds=2, seed=3)
    outcome = plan_job(load_job(path), settings=settings, executor=executor)
    return plan_to_dict(outcome.plan, tmp_path)


def test_same_plan_in_process_in_a_pool_and_on_a_dask_cluster(tmp_path):
    distributed = pytest.importorskip("distributed")
    path = _job(tmp_path)
    ref = _plan_data(path, InProcess(), tmp_path)
    comps = ref["notes"]["components"]
    assert [c["printer_names"] for c in comps] == [["bench-a"], ["bench-b"], ["vat-d"]]
    assert ref["notes"]["deterministic"] and sum(len(p["items"]) for p in ref["plates"]) == 16
    # fleet-wide figures of the joined plan, read again from its own plates and orders: order T-1 has
    # copies in two components (PLA and resin) and counts once; the finish is the last plate's
    plates, notes = ref["plates"], ref["notes"]
    assert notes["late_orders"] == sum(1 for o in ref["orders"] if o["late_minutes"] > 0)
    assert notes["finish"] == max(p["free"] for p in plates)
    assert [p["id"] for p in plates] == [f"P{k + 1:02d}" for k in range(len(plates))]
    assert sum(b["used"] for b in ref["bounds"]["plates"].values()) == len(plates) == notes["plates"]
    assert notes["fits_calls"] == sum(c["fits_calls"] for c in comps)
    with ProcessPool(2) as pool:
        assert _plan_data(path, pool, tmp_path) == ref
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  scheduler_port=0, dashboard_address=None) as cluster:
        with DaskCluster(cluster.scheduler_address) as dask:
            assert _plan_data(path, dask, tmp_path) == ref


def test_cluster_that_does_not_answer_names_the_option():
    pytest.importorskip("distributed")
    with pytest.raises(PackerError, match=r"--cluster tcp://127\.0\.0\.1:9: no Dask scheduler answered"):
        DaskCluster("tcp://127.0.0.1:9", timeout_s=1.0)


def test_executor_choice_and_its_errors(tmp_path, capsys):
    assert isinstance(executor_for(), InProcess)
    assert executor_for(workers=3).workers == 3
    with pytest.raises(InputError, match="exclude each other"):
        executor_for(workers=2, cluster="tcp://127.0.0.1:9")
    with pytest.raises(InputError, match="--workers must be at least 1"):
        ProcessPool(0)
    assert main(["plan", str(tmp_path / "none.yaml"), "--workers", "2", "--cluster", "tcp://x:1"]) == 2
    assert "not allowed with argument" in capsys.readouterr().err
