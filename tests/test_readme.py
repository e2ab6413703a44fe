"""The newcomer's run: every command shown in README.md works exactly as written, and so does every example.

Conventions of README.md (kept by its authors, relied on here):

- shell examples are fenced blocks marked ``console``; each command is a line starting with ``$ ``, continued on
  the following lines while a line ends with a backslash; other lines in the block are shown output;
- the two set-up commands are the ``sh`` block under the heading "Set-up": the first installs the tool and runs
  the main job, the second installs the test extra and runs the tests. CI (``.ci/run``) must run the second
  one's test command (from its ``pip install`` on) verbatim; here the first one's part after its
  ``pip install`` step is run (installing is CI's job: it makes the fresh virtual environment);
- ``python`` blocks are complete snippets; ``toml`` blocks are structure files or job files.

Every command runs through bash, as written, in a fresh temporary folder holding a copy of ``examples/``, with
the installed console script (next to ``sys.executable``) first on PATH; it must exit with status 0 (or the
status a trailing ``# exit status N`` comment on the command states). Scripts in ``examples/`` are run too
(their quick mode when they have one), unless another test module runs them already.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
README = ROOT / "README.md"
CI_SCRIPT = ROOT / ".ci" / "run"
EXAMPLES = ROOT / "examples"
BIN = Path(sys.executable).parent
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), the 8-byte file signature
#: generous bound for one command (the slowest, the set-up main job, takes seconds; a hang must not block CI)
TIMEOUT_S = 600
_STATUS = re.compile(r"#\s*exit status (\d+)\s*$")
#: options by which a script offers a quick run, in order of preference
QUICK_OPTIONS = ("--tiny", "--quick")


@dataclass(frozen=True)
class Block:
    """A fenced block of README.md."""

    lang: str
    heading: str  # the last heading above the block
    line: int  # line number of the opening fence (from 1)
    text: str


def readme_blocks(text: str) -> list[Block]:
    """Every fenced block of `text` with its language tag and the heading it sits under."""
    blocks, heading, fence = [], "", None
    body: list[str] = []
    for n, line in enumerate(text.splitlines(), start=1):
        if fence is None:
            if line.startswith("```"):
                fence, body = (line[3:].strip(), n), []
            elif line.startswith("#"):
                heading = line.lstrip("#").strip()
        elif line.startswith("```"):
            blocks.append(Block(fence[0], heading, fence[1], "\n".join(body)))
            fence = None
        else:
            body.append(line)
    assert fence is None, f"README.md: the block opened on line {fence[1]} is never closed"
    return blocks


def console_commands(block: Block) -> list[tuple[int, str]]:
    """The ``$ `` commands of a console block with their README line numbers, continuation lines kept."""
    commands: list[tuple[int, str]] = []
    current, start = None, 0
    for n, line in enumerate(block.text.splitlines(), start=block.line + 1):
        if current is None:
            if not line.startswith("$ "):
                continue
            current, start = line[2:], n
        else:
            current += "\n" + line
        if not current.endswith("\\"):
            commands.append((start, current))
            current = None
    assert current is None, f"README.md line {start}: a command ends in a backslash with nothing after it"
    return commands


BLOCKS = readme_blocks(README.read_text(encoding="utf-8"))
COMMANDS = [lc for b in BLOCKS if b.lang == "console" for lc in console_commands(b)]
SNIPPETS = [b for b in BLOCKS if b.lang == "python"]
TOML_BLOCKS = [b for b in BLOCKS if b.lang == "toml"]


def setup_commands() -> list[str]:
    (block,) = [b for b in BLOCKS if b.lang == "sh" and b.heading == "Set-up"]
    lines = [ln.strip() for ln in block.text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    assert len(lines) == 2, f"the Set-up block holds {len(lines)} commands, not the two the README promises"
    return lines


def after_pip_install(command: str, *, include: bool) -> str:
    """The steps of a ``a && b && ...`` command from its ``pip install`` step on (`include`) or after it."""
    steps = [s.strip() for s in command.split("&&")]
    k = next(i for i, s in enumerate(steps) if s.startswith("pip install"))
    return " && ".join(steps[k if include else k + 1 :])


@pytest.fixture
def fresh(tmp_path: Path) -> Path:
    """A fresh folder holding a copy of examples/ (README commands refer to examples/...)."""
    shutil.copytree(EXAMPLES, tmp_path / "examples", ignore=shutil.ignore_patterns("__pycache__", ".*"))
    return tmp_path


def _env() -> dict[str, str]:
    env = dict(os.environ)
    env["PATH"] = f"{BIN}{os.pathsep}{env.get('PATH', '')}"
    env["MPLBACKEND"] = "Agg"  # no display in CI
    return env


def _bash(command: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run(["bash", "-c", command], cwd=cwd, env=_env(), capture_output=True, text=True,
                          timeout=TIMEOUT_S, check=False)  # fmt: skip


# ---------------------------------------------------------------------------------------------- the README itself
def test_readme_shows_commands() -> None:
    """The README has commands to test (a renamed fence would silently drop them all)."""
    assert len(COMMANDS) >= 5
    assert all(c.split()[0] == "solubility" for _, c in COMMANDS), "a console command that is not the tool"
    assert (BIN / "solubility").is_file(), f"the console script is not installed next to {sys.executable}"


def test_ci_runs_the_readme_test_command() -> None:
    """.ci/run holds the README's test command verbatim (from its pip install step on)."""
    _, test_line = setup_commands()
    test_command = after_pip_install(test_line, include=True)
    assert "pytest" in test_command
    assert test_command in CI_SCRIPT.read_text(encoding="utf-8")


def test_setup_commands_make_a_fresh_environment() -> None:
    """Both set-up commands start by making and activating the virtual environment they install into."""
    main_line, test_line = setup_commands()
    for line in (main_line, test_line):
        steps = [s.strip() for s in line.split("&&")]
        assert steps[0].startswith("python3 -m venv "), line
        assert any(s.startswith(". ") and s.endswith("/bin/activate") for s in steps[1:]), line
        assert any(s.startswith("pip install .") or s.startswith("pip install '.") for s in steps), line


@pytest.mark.slow
def test_setup_main_job_runs(fresh: Path) -> None:
    """The first set-up command's main job (after its pip install step) runs and writes what it names."""
    main_line, _ = setup_commands()
    job = after_pip_install(main_line, include=False)
    proc = _bash(job, fresh)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip(), "the main job printed no table"
    words = job.split()
    for option in ("--csv", "--netcdf", "--plot", "--output"):
        if option in words:
            out = fresh / words[words.index(option) + 1]
            assert out.is_file() and out.stat().st_size > 0, out
            if out.suffix == ".png":
                assert out.read_bytes()[:8] == PNG_SIGNATURE


@pytest.mark.slow
@pytest.mark.parametrize("line, command", COMMANDS, ids=[f"README-L{n}" for n, _ in COMMANDS])
def test_readme_command(line: int, command: str, fresh: Path) -> None:
    """A console command of the README, run as written; with --json its standard output is one JSON object."""
    status = _STATUS.search(command)
    proc = _bash(command, fresh)
    assert proc.returncode == (int(status.group(1)) if status else 0), f"README line {line}: {proc.stderr}"
    if "--json" in command.split():
        assert isinstance(json.loads(proc.stdout), dict)


@pytest.mark.slow
@pytest.mark.parametrize("block", SNIPPETS, ids=[f"README-L{b.line}" for b in SNIPPETS])
def test_readme_python_snippet(block: Block, fresh: Path) -> None:
    """A python block of the README runs as a script without error."""
    proc = subprocess.run([sys.executable, "-c", block.text], cwd=fresh, env=_env(), capture_output=True,
                          text=True, timeout=TIMEOUT_S, check=False)  # fmt: skip
    assert proc.returncode == 0, f"README line {block.line}: {proc.stderr}"


@pytest.mark.parametrize("block", TOML_BLOCKS, ids=[f"README-L{b.line}" for b in TOML_BLOCKS])
def test_readme_toml_block_is_valid(block: Block, tmp_path: Path) -> None:
    """A toml block is a valid job file (it has [[case]] or [[product]] tables) or a valid structure file."""
    path = tmp_path / "from_readme.toml"
    path.write_text(block.text + "\n", encoding="utf-8")
    if re.search(r"^\s*\[\[(case|product)\]\]", block.text, flags=re.M):
        from solubility.sweeps import read_job

        assert read_job(path)
    else:
        from solubility import find_sites, read_structure

        assert find_sites(read_structure(path))


# ---------------------------------------------------------------------------------------------- examples/
def _run_elsewhere(script: Path) -> bool:
    """Another test module runs this script (so it is not run twice)."""
    here = Path(__file__).name
    return any(script.name in p.read_text(encoding="utf-8") for p in Path(__file__).parent.glob("test_*.py")
               if p.name != here)  # fmt: skip


SCRIPTS = sorted(EXAMPLES.glob("*.py"))


@pytest.mark.slow
def test_example_scripts_run(fresh: Path) -> None:
    """Every script of examples/ that no other test module runs runs here (quick mode if it has one), status 0."""
    for script in SCRIPTS:
        if _run_elsewhere(script):
            continue
        source = script.read_text(encoding="utf-8")
        quick = [opt for opt in QUICK_OPTIONS if opt in source][:1]
        proc = subprocess.run([sys.executable, str(fresh / "examples" / script.name), *quick], cwd=fresh,
                              env=_env(), capture_output=True, text=True, timeout=TIMEOUT_S, check=False)
        assert proc.returncode == 0, f"{script.name}: {proc.stderr}"


def test_console_parser_joins_continuations() -> None:
    """The parser keeps a backslash-continued command whole and skips shown output (invented block)."""
    text = "$ solubility sites bcc \\\n    --json\n{\"shown\": \"output\"}\n$ solubility databases"
    block = Block("console", "x", 10, text)
    assert console_commands(block) == [(11, "solubility sites bcc \\\n    --json"), (14, "solubility databases")]
