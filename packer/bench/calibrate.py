"""Fit the work rates of :mod:`packer.nest.budget` to CPU time (a development tool).

``python -m packer.bench.calibrate INSTANCE.json ... [--seconds S] [--check]``

Runs each instance with one process (strip instances through the strip
search, bin instances through the plate search), samples the process's CPU
time (``time.process_time``, so other processes on a shared machine do not
distort it) and the per-kind work counts every 0.2 s of CPU, and fits
seconds per item of each kind by non-negative least squares over all
windows.  Prints the rates as a ``_rates(...)`` call for ``budget.py`` and,
per instance, CPU seconds per budget second with the rates in use (``--check``
only measures, it does not fit).  Run it on the idle development machine on a
mix of shared and generated instances (``packer bench nest --generated N
--out DIR`` writes generated ones).
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
from scipy.optimize import nnls

from packer.nest import budget
from packer.bench.instances import read_instance
from packer.nest.shapes import Container

#: weight of the pull towards the rates in use (a relative deviation of 1 costs PULL**2 s**2)
PULL = 0.03

#: weight of a file of replayed plate calls, in instances
CALL_WEIGHT = 8.0

_SAMPLES: list = []
_LAST = [0.0]
#: the meter of the run being measured (each run of this tool counts on its own)
_METER = [budget.Meter()]


def _sample(force: bool = False, skip: bool = False) -> None:
    """Record (CPU s, counts, work units, skip the window that starts here)."""
    t = time.process_time()
    if force or t - _LAST[0] >= 0.2:
        _LAST[0] = t
        _SAMPLES.append((t, list(_METER[0].counts), _METER[0].units, skip))


def _unmeasured(fn):
    """``fn`` with its CPU time left out of the windows (the exact check is not charged work)."""
    def wrapped(*a, **kw):
        _sample(force=True, skip=True)
        out = fn(*a, **kw)
        _sample(force=True)
        return out
    return wrapped


def _probed_done(self, _done=budget.Budget.done):
    _sample()
    return _done(self)


def _run_instance(path, seconds: float, seed: int):
    """Run one instance in this process; returns its samples [(cpu, counts, work)]."""
    from packer.nest import plates, strip

    inst = read_instance(path)
    _SAMPLES.clear()
    meter = _METER[0] = budget.Meter()
    _sample(force=True)
    if inst.strip_width is not None:
        strip.run_seed((inst.shapes, inst.strip_width, seconds, 1e-6 * inst.strip_width), seed, meter)
    else:
        w, h = inst.bin_size
        box = Container.rectangle(w, h)
        clearance = 0.0 if "terashima" in str(path) else 1e-6 * max(w, h)
        plates.run_seed((inst.shapes, box, clearance, seconds, 0), seed, meter)
    _sample(force=True)
    return inst.name, list(_SAMPLES)


def _run_calls(path):
    """Replay pickled layout calls [(kind "fit" | "fill", shapes, container, keywords)], one window each."""
    import pickle

    from packer.nest import plates, poolfill
    from packer.nest.plates import fit_on_plate
    from packer.nest.poolfill import fill_plate

    plates.verify_layout = _unmeasured(plates.verify_layout)
    poolfill.verify_layout = _unmeasured(poolfill.verify_layout)

    with open(path, "rb") as fh:
        calls = pickle.load(fh)   # a file this tool's user captured: trusted input
    _SAMPLES.clear()
    meter = _METER[0] = budget.Meter()
    for kind, shapes, container, kw in calls:
        _sample(force=True)
        (fit_on_plate if kind == "fit" else fill_plate)(shapes, container, meter=meter, **kw)
        _sample(force=True)
    return Path(path).stem, list(_SAMPLES)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(prog="python -m packer.bench.calibrate")
    ap.add_argument("instances", nargs="*")
    ap.add_argument("--seconds", type=float, default=6.0, help="budget per instance (s)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--check", action="store_true", help="only measure CPU per budget second")
    ap.add_argument("--table", choices=("strip", "plate"), default=None,
                    help="which rate table the fit starts from and prints: the strip search's "
                         "(STRIP_RATE, default for strip instances) or the plate calls' (RATE, default "
                         "with --calls); fit strip and plate runs separately")
    ap.add_argument("--dump", help="save the windows to this .npz file (to fit several runs together)")
    ap.add_argument("--load", nargs="*", default=[], help="also fit the windows of these .npz files")
    ap.add_argument("--calls", nargs="*", default=[],
                    help="pickled plate layout calls to replay (list of (\"fit\" | \"fill\", shapes, "
                         "container, keywords)), as the fleet planner makes them")
    args = ap.parse_args(argv)
    budget.Budget.done = _probed_done
    rows, times, weights, per = [], [], [], []
    if args.instances:
        _run_instance(args.instances[0], 0.3, args.seed)   # compiled kernels loaded before measuring
    jobs = [(_run_instance, (p, args.seconds, args.seed), 1.0) for p in args.instances]
    # the fleet planner makes thousands of such calls a day: a call file weighs as much as
    # CALL_WEIGHT instances
    jobs += [(_run_calls, (p,), CALL_WEIGHT) for p in args.calls]
    for fn, fargs, weight in jobs:
        name, samples = fn(*fargs)
        cpu = samples[-1][0] - samples[0][0]
        work = (samples[-1][2] - samples[0][2]) / budget.UNITS_PER_SECOND
        per.append((name, cpu, work, samples))
        print(f"{name:<28} cpu {cpu:6.2f} s  work {work:6.2f} s  cpu/work {cpu / max(work, 1e-9):5.2f}",
              flush=True)
        windows = [(a, b) for a, b in zip(samples, samples[1:]) if b[0] - a[0] > 0 and not a[3]]
        for a, b in windows:
            rows.append(np.subtract(b[1], a[1]))
            times.append(b[0] - a[0])
            # every instance (or call file) weighs the same in the fit, however many windows it has
            weights.append(weight / np.sqrt(len(windows)))
    if args.check:
        return 0
    a = np.array(rows, dtype=float).reshape(-1, len(budget.KINDS))
    t = np.array(times)
    w = np.array(weights)
    if args.dump:
        np.savez(args.dump, a=a, t=t, w=w)
    for f in args.load:
        got = np.load(f)
        ga = got["a"]
        if ga.shape[1] < a.shape[1]:   # windows saved before a kind was added: none of it counted
            ga = np.hstack([ga, np.zeros((len(ga), a.shape[1] - ga.shape[1]))])
        a, t = np.vstack([a, ga]), np.concatenate([t, got["t"]])
        w = np.concatenate([w, got["w"] if "w" in got else np.full(len(got["t"]), 1.0 / np.sqrt(len(got["t"]) / 12))])
    a, t = a * w[:, None], t * w
    used = np.flatnonzero(a.sum(axis=0) > 0)
    scale = a[:, used].max(axis=0)
    # kinds that always come together cannot be told apart by the windows alone: a weak pull
    # towards the rates in use keeps each one near its own cost instead of trading it off
    table = args.table or ("plate" if args.calls else "strip")
    rates = budget.STRIP_RATE if table == "strip" else budget.RATE
    prior = np.array(rates)[used] / budget.UNITS_PER_SECOND * scale
    # a kind at 0 in use is not pulled (a pull of PULL / 0 would hold it at 0 for ever, so a kind
    # that some instances do pay for, such as the per-point work of a 3-piece strip, never came back)
    pulled = prior > 0
    pull = np.diag(np.where(pulled, PULL / np.where(pulled, prior, 1.0), 0.0))
    x, _ = nnls(np.vstack([a[:, used] / scale, pull]), np.concatenate([t, np.where(pulled, PULL, 0.0)]))
    sec = np.zeros(len(budget.KINDS))
    sec[used] = x / scale
    print("fitted rates (work units per item):")
    print(("_strip_rates(" if table == "strip" else "_rates(") + ", ".join(f"{budget.KINDS[k]}={sec[k] * budget.UNITS_PER_SECOND:.4g}" for k in used) + ")")
    print("with the fitted rates, cpu / predicted per instance:")
    for name, cpu, _, samples in per:
        counts = np.subtract(samples[-1][1], samples[0][1])
        pred = float(counts @ sec)
        print(f"  {name:<28} {cpu / max(pred, 1e-9):5.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
