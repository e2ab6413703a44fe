"""The sweep example of examples/: the script and the notebook run and make their figure (tiny grids).

The figure is checked to be a PNG file (its 8-byte signature, from the PNG specification, ISO/IEC 15948).
"""

from __future__ import annotations

import ast
import json
import os
import subprocess
import sys
from pathlib import Path

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def test_script_makes_its_figure(tmp_path):
    figure = tmp_path / "fig.png"
    run = subprocess.run([sys.executable, str(EXAMPLES / "sweep_fe_c_pressure.py"), "--tiny", "--workers", "1",
                          "--output", str(figure)], capture_output=True, text=True, timeout=600, cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert json.loads(run.stdout) == {"cases": 12, "ok": 12, "figure": str(figure)}
    assert figure.read_bytes()[:8] == PNG_SIGNATURE


def test_notebook_has_no_outputs_and_runs(tmp_path):
    nb = json.loads((EXAMPLES / "sweep_fe_c_pressure.ipynb").read_text())
    assert nb["nbformat"] == 4
    code = [c for c in nb["cells"] if c["cell_type"] == "code"]
    assert code and all(c["outputs"] == [] and c["execution_count"] is None for c in code)
    source = "\n".join("".join(c["source"]) for c in code)
    ast.parse(source)
    figure = tmp_path / "nb.png"
    env = {**os.environ, "SOLUBILITY_EXAMPLE_TINY": "1", "SOLUBILITY_EXAMPLE_FIGURE": str(figure),
           "MPLBACKEND": "Agg"}
    run = subprocess.run([sys.executable, "-c", source], capture_output=True, text=True, timeout=600,
                         cwd=EXAMPLES, env=env)
    assert run.returncode == 0, run.stderr
    assert figure.read_bytes()[:8] == PNG_SIGNATURE
