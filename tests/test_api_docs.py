"""docs/api.md is runnable (issue 12): every Python block of the page runs as its own
script, in order, in a scratch directory that sees the bundled demo; the outputs the
page promises are checked against the command line's and against physics.

Outside references: the classical harmonic heat capacity of N atoms, 3(N − 1)k per
system with the centre of mass removed (equipartition, common practice); the parallel
and block runs against the serial run of the same code (exact joining, up to rounding).
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from qcorr.cli import main as qcorr_main

REPO = Path(__file__).resolve().parents[1]
PAGE = REPO / "docs" / "api.md"


def python_blocks() -> list[str]:
    return re.findall(r"```python\n(.*?)```", PAGE.read_text(encoding="utf-8"), flags=re.DOTALL)


def test_the_page_has_the_promised_examples():
    blocks = python_blocks()
    assert len(blocks) >= 5
    first = [line for line in blocks[0].splitlines() if line.strip()]
    # from a Universe to a corrected-property DataFrame in about five statements
    assert sum(1 for line in first if not line.startswith((" ", "import", ")"))) <= 6


@pytest.mark.slow
def test_every_block_of_the_api_page_runs(tmp_path):
    (tmp_path / "resources").symlink_to(REPO / "resources")
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        [str(REPO), os.environ.get("PYTHONPATH", "")]).rstrip(os.pathsep), "MPLBACKEND": "Agg"}
    outputs = []
    for number, code in enumerate(python_blocks(), start=1):
        script = tmp_path / f"block_{number}.py"
        script.write_text(code, encoding="utf-8")
        result = subprocess.run([sys.executable, str(script)], cwd=tmp_path, env=env,
                                capture_output=True, text=True, timeout=600, check=False)
        assert result.returncode == 0, f"block {number}:\n{result.stdout}\n{result.stderr}"
        outputs.append(result.stdout)
    # block 1: the library's table equals the command's table on the same file
    assert qcorr_main(["properties", str(tmp_path / "copper_100K.nc"), "--system", "copper_100K",
                       "--quiet", "--output", str(tmp_path / "cli.csv")]) == 0
    cli = pd.read_csv(tmp_path / "cli.csv")
    api = pd.read_csv(tmp_path / "copper.csv")  # block 2 wrote it from the saved spectrum
    row = cli.query("property == 'heat_capacity' and basis == 'per_system' and temperature_K == 100")
    # classical harmonic Cv of the whole crystal: the degrees of freedom times k
    from qcorr.constants import boltzmann_J_per_K
    dof = 3 * 108 - 3
    assert float(row["classical"].iloc[0]) == pytest.approx(dof * boltzmann_J_per_K, rel=1e-12)
    same = api.query("temperature_K == 100").reset_index(drop=True)
    cli = cli.reset_index(drop=True)
    value_columns = ["classical", "quantum", "correction", "classical_se", "quantum_se",
                     "correction_se"]
    pd.testing.assert_frame_equal(same.drop(columns=["system", "note"])[value_columns],
                                  cli.drop(columns=["system", "note"])[value_columns])
    assert (tmp_path / "copper.schema.json").is_file()
    assert 'class="sortable"' in (tmp_path / "copper.html").read_text()
    assert (tmp_path / "copper_cumulative.svg").stat().st_size > 0
    # block 4 and 5: parallel and frame blocks equal the serial run
    for text in (outputs[3], outputs[4]):
        difference = float(text.strip().split()[-1])
        assert difference < 1e-12
    assert outputs[5].startswith("refused: ") and outputs[5].count("\n") == 1
    # block 7 (issue 13): corrected energy and free energy of the demo water from its energy
    # file; no heat capacity (the 3-ps run sampled no canonical fluctuations)
    assert "energy" in outputs[6] and "helmholtz_free_energy" in outputs[6]
    assert "heat_capacity" not in outputs[6]
