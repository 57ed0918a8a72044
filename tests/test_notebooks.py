"""Every notebook in notebooks/ runs top to bottom (nbclient, explicit timeout) and is thin.

The notebooks run concurrently (one kernel each) to keep the suite short on 2 cores; each
must finish without an error output, show its dashboard and its equations, and be committed
without outputs.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOKS = sorted((ROOT / "notebooks").glob("*.ipynb"))
TIMEOUT = 240  # [s] per cell, on a busy 2-core machine

pytestmark = pytest.mark.slow

# what each dashboard must show once it has run (text of its panels' summaries)
EXPECTED = {
    "explore_layout": ["feasible share of the task grid", "tensions at the view pose", "highest tensions from"],
    "accuracy_study": ["95 % of builds within", "position error"],
    "arm_and_task": ["weakest servo", "pivot: over a full wrist turn"],
    "review": ["checks, overall", "source of the limit"],
    "design_sweep": ["on the Pareto front", "feasible share of the task grid"],
}


@pytest.fixture(scope="module")
def executed():
    async def one(path: Path):
        nb = nbformat.read(path, as_version=4)
        client = NotebookClient(nb, timeout=TIMEOUT, kernel_name="python3",
                                resources={"metadata": {"path": str(path.parent)}})
        await client.async_execute()
        return nb

    async def run():
        return await asyncio.gather(*(one(p) for p in NOTEBOOKS), return_exceptions=True)

    return dict(zip(NOTEBOOKS, asyncio.run(run())))


def test_the_four_notebooks_are_there():
    assert {p.stem for p in NOTEBOOKS} >= {"explore_layout", "accuracy_study", "arm_and_task", "review"}


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_notebook_is_committed_thin_and_without_outputs(path):
    nb = nbformat.read(path, as_version=4)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert all(not c.get("outputs") and c.get("execution_count") is None for c in code)
    assert any("parameters" in c.metadata.get("tags", []) for c in code)  # `cablekit serve --design` sets it
    source = "\n".join(c.source for c in code)
    assert "from cablekit.widgets import" in source and "EquationsView" in source
    assert "def " not in source and "import numpy" not in source  # nothing numeric lives in a notebook
    assert sum(len(c.source.splitlines()) for c in code) < 25


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_notebook_executes(path, executed):
    nb = executed[path]
    if isinstance(nb, BaseException):
        raise nb
    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])]
    errors = [o for o in outputs if o.get("output_type") == "error"]
    assert not errors, "\n".join(f"{o['ename']}: {o['evalue']}" for o in errors)
    views = [o for o in outputs if "application/vnd.jupyter.widget-view+json" in o.get("data", {})]
    assert len(views) >= 2  # the dashboard and the equations
    text = " ".join(str(o.get("text", "")) for o in outputs)
    assert "Traceback" not in text
    # the panels' own status lines (widget state saved by nbclient): no failure, nothing missing
    state = nb.metadata.get("widgets", {}).get("application/vnd.jupyter.widget-state+json", {}).get("state", {})
    shown = [m.get("state", {}).get("value") for m in state.values()]
    shown = [v for v in shown if isinstance(v, str)]
    expected = EXPECTED.get(path.stem, [])
    for words in expected + ["$$"]:  # the panel's numbers, and the rendered equations
        assert any(words in v for v in shown), f"{path.stem}: nothing shows {words!r}"
    bad = [v for v in shown if "internal error" in v or "not available yet" in v or "not applied" in v]
    assert not bad, bad[:3]
