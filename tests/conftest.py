"""Shared fixtures: the demo job planned once per test session."""

import json
from pathlib import Path

import pytest

from packer.intake.job import load_job
from packer.output.write import write_outputs
from packer.pipeline import PlanSettings, plan_job

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "jobs" / "brindle-lane-day.yaml"


@pytest.fixture(scope="session")
def demo(tmp_path_factory):
    """(job, plan.json as a dict, output folder) of the demo day, planned with a 10 s budget."""
    out = tmp_path_factory.mktemp("demo")
    job = load_job(DEMO)
    outcome = plan_job(job, settings=PlanSettings(seconds=10, seed=0))
    write_outputs(outcome, out)
    return job, json.loads((out / "plan.json").read_text()), out
