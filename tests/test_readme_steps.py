"""The README's step-by-step example runs as written, in an empty folder.

The commands are read from README.md itself (the first code block under
"## The job, step by step"), so the example cannot drift from what the tool
does. Each command must exit 0; the evaluation must print a conclusion
resting on the bound the plan named, and the selection must re-perform.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

from .conftest import PROJECT_ROOT


def _steps() -> list[str]:
    text = (PROJECT_ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## The job, step by step", 1)[1]
    block = section.split("```", 2)[1]
    commands: list[str] = []
    pending = ""
    for raw in block.splitlines():
        line = raw.rstrip()
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        if line.endswith("\\"):
            pending += line[:-1] + " "
            continue
        commands.append((pending + line).strip())
        pending = ""
    return commands


def test_the_readme_names_the_whole_chain():
    steps = [c.split()[1] for c in _steps() if c.startswith("auditmean ")]
    assert steps == ["demo", "plan", "select", "record", "evaluate", "verify", "simulate", "report"]


def test_the_step_by_step_example_runs_literally(tmp_path):
    env = dict(os.environ)
    # the commands call `auditmean` and `python` as a user's shell would: this interpreter's
    bindir = str(Path(sys.executable).parent)
    env["PATH"] = bindir + os.pathsep + env.get("PATH", "")
    outputs = {}
    for command in _steps():
        done = subprocess.run(command, shell=True, cwd=tmp_path, env=env, capture_output=True, text=True,
                              timeout=600)
        assert done.returncode == 0, f"{command}\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}"
        outputs[command.split()[1] if command.startswith("auditmean") else "python"] = done.stdout
    assert "Conclusion (" in outputs["evaluate"] and "* betting" in outputs["evaluate"]
    assert "matches" in outputs["verify"]
    assert (tmp_path / "receivables" / "workpaper.xlsx").exists()
    assert (tmp_path / "receivables" / "workpaper.html").exists()
