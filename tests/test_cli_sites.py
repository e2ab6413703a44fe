"""The `solubility sites` command: design.md's JSON contract, the table, errors, one real subprocess."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from solubility.cli.main import main

EXAMPLES = Path(__file__).resolve().parent.parent / "examples" / "structures"


def _json(capsys, argv: list[str]) -> dict:
    assert main(argv) == 0
    out = capsys.readouterr().out
    return json.loads(out)  # the whole of stdout is one JSON object


def _by_kind(data: dict) -> dict[str, dict]:
    return {s["kind"]: s for s in data["sites"]}


def test_json_contract_bcc(capsys) -> None:
    data = _json(capsys, ["sites", "bcc", "--json"])
    assert data["structure"] == "bcc"
    assert data["host_radius"] is None  # no lattice parameter and no R: no absolute scale
    for site in data["sites"]:
        assert isinstance(site["kind"], str) and isinstance(site["coordination"], int)
        assert isinstance(site["per_host_atom"], float) and isinstance(site["radius_ratio"], float)
        assert site["radius"] is None and site["neighbour_distances"] is None
        assert all(len(p) == 3 for p in site["positions"])
    octa = _by_kind(data)["octahedral"]
    # BCC octahedral: 3 per atom, r/R = 2/sqrt(3) - 1, 2 neighbours at a/2 and 4 at a/sqrt(2) (textbook),
    # i.e. d/R = 2/sqrt(3) and 4/sqrt(6) with R = sqrt(3) a / 4; tolerance 1e-9 (rounding only)
    assert octa["per_host_atom"] == 3.0 and octa["coordination"] == 6
    assert octa["radius_ratio"] == pytest.approx(2 / math.sqrt(3) - 1, abs=1e-9)
    assert octa["neighbour_distance_ratios"] == pytest.approx([2 / math.sqrt(3)] * 2 + [4 / math.sqrt(6)] * 4)
    assert octa["critical_point"] == "saddle" and octa["distorted"] is True
    assert len(octa["positions"]) == 6


def test_json_with_lattice_parameter(capsys) -> None:
    # fcc, a = 3.6 Å (invented round number): octahedral r = a (1 - 1/sqrt(2)) / 2 (textbook: a/2 - R)
    data = _json(capsys, ["sites", "fcc", "--lattice-parameter", "3.6", "--json"])
    assert data["host_radius"] == pytest.approx(3.6 / math.sqrt(8), abs=1e-12)
    octa = _by_kind(data)["octahedral"]
    assert octa["radius"] == pytest.approx(3.6 / 2 - 3.6 / math.sqrt(8), abs=1e-9)
    assert octa["neighbour_distances"] == pytest.approx([1.8] * 6, abs=1e-9)
    assert octa["misfit"] is None


def test_json_misfit(capsys) -> None:
    argv = [
        "sites",
        "bcc",
        "--host-radius",
        "1.24",
        "--solute-radius",
        "0.77",
        "--shear-modulus",
        "8.2e10",
        "--solute-bulk-modulus",
        "1.7e11",
        "--json",
    ]
    octa = _by_kind(_json(capsys, argv))["octahedral"]
    m = octa["misfit"]
    r = octa["radius"]
    assert m["eps"] == pytest.approx((0.77 - r) / r, rel=1e-12)
    # Eshelby (Solid State Physics 3, 1956): rigid 8 pi mu r^3 eps^2 (r in m)
    assert m["energy_rigid_J"] == pytest.approx(
        8 * math.pi * 8.2e10 * (r * 1e-10) ** 3 * m["eps"] ** 2, rel=1e-12
    )
    assert m["energy_compressible_J"] < m["energy_rigid_J"]
    assert m["size_ratio"] == pytest.approx(0.77 / 1.24, rel=1e-12) and m["fits_size_rule"] is False


def test_hcp_c_over_a_and_file(capsys) -> None:
    data = _json(capsys, ["sites", "hcp", "--c-over-a", "1.587", "--json"])
    assert {s["kind"]: s["per_host_atom"] for s in data["sites"]} == {"octahedral": 1.0, "tetrahedral": 2.0}
    b2 = _json(capsys, ["sites", str(EXAMPLES / "b2.toml"), "--json"])
    assert b2["structure"] == "B2" and b2["host_radius"] == pytest.approx(2.90 * math.sqrt(3) / 4, abs=1e-12)
    assert sorted(s["per_cell"] for s in b2["sites"]) == [3, 3, 12]


def test_table(capsys) -> None:
    assert main(["sites", "bcc", "--lattice-parameter", "2.8665"]) == 0
    out = capsys.readouterr().out
    assert "octahedral" in out and "tetrahedral" in out and "saddle" in out and "distorted" in out
    assert "R = 1.2412 Å" in out  # sqrt(3) * 2.8665 / 4 = 1.241230..., printed to 4 decimals
    assert main(["sites", "diamond"]) == 0
    assert "hexagonal" in capsys.readouterr().out


@pytest.mark.parametrize(
    ("argv", "words"),
    [
        pytest.param(["sites", "nonsuch"], "neither a built-in", id="unknown-structure"),
        pytest.param(["sites", "hcp", "--c-over-a", "-1"], "greater than zero", id="negative-c/a"),
        pytest.param(["sites", "hcp", "--c-over-a", "nan"], "finite", id="nan-c/a"),
        pytest.param(["sites", "fcc", "--c-over-a", "1.6"], "hcp only", id="c/a-for-fcc"),
        pytest.param(["sites", "bcc", "--lattice-parameter", "-2.9"], "greater than zero", id="negative-a"),
        pytest.param(["sites", "bcc", "--solute-radius", "0.7"], "absolute scale", id="solute-without-scale"),
        pytest.param(
            ["sites", "bcc", "--host-radius", "1.2", "--shear-modulus", "8e10"],
            "need --solute-radius",
            id="modulus-without-solute",
        ),
    ],
)
def test_errors_are_one_line(capsys, argv: list[str], words: str) -> None:
    assert main(argv) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and words in lines[0] and "Traceback" not in captured.err


def test_installed_command_subprocess() -> None:
    exe = Path(sys.executable).parent / "solubility"
    out = subprocess.run([str(exe), "sites", "bcc", "--json"], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    kinds = {s["kind"]: s["per_host_atom"] for s in data["sites"]}
    assert kinds == {"octahedral": 3.0, "tetrahedral": 6.0}  # textbook bcc counts


def test_sites_command_imports_nothing_heavy() -> None:
    code = (
        "import sys, io, contextlib\n"
        "from solubility.cli.main import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        "    rc = main(['sites', 'bcc', '--json'])\n"
        "heavy = sorted(m for m in ('pycalphad', 'xarray', 'matplotlib') if m in sys.modules)\n"
        "print(rc, ','.join(heavy))\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, timeout=120
    )
    assert out.stdout.split() == ["0"], f"heavy modules imported by 'solubility sites': {out.stdout}"
