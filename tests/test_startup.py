"""Start-up: what `arcwindow --help` imports, and the first run's compile saying what it does.

No timing is asserted here (speed goals live in `arcwindow bench --section startup`); these
tests check the causes: which modules a command imports, and what is printed while kernels are
compiled.
"""

from __future__ import annotations

import importlib
import os
import subprocess
import sys
from pathlib import Path

import pytest

from app.cli import main

REPO = Path(__file__).resolve().parents[1]


def _imported_after(argv: list[str]) -> set[str]:
    script = (
        "import sys, contextlib, io\n"
        "from app.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        f"    main({argv!r})\n"
        "print(' '.join(sorted(sys.modules)))\n"
    )
    proc = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, text=True, timeout=120
    )
    assert proc.returncode == 0, proc.stderr
    return set(proc.stdout.split())


def test_help_imports_no_subcommand_numpy_or_kernels():
    modules = _imported_after(["--help"])
    heavy = {"numpy", "numba", "scipy", "pandas", "dash", "dask", "erfa"}
    assert not heavy & modules
    assert not any(m.startswith("app.commands.") for m in modules)


def test_a_subcommand_imports_only_its_own_module():
    modules = _imported_after(["cases", "--help"])
    commands = {m for m in modules if m.startswith("app.commands.")}
    assert commands <= {"app.commands.cases_cmd", "app.commands._common"}


def test_the_startup_benchmark_puts_help_beside_python_itself():
    from app.bench import run_sections

    lines = run_sections(["startup"], size="quick")
    help_line = next(line for line in lines if "--help" in line.name)
    assert help_line.baseline_value and help_line.value > 0 and help_line.goal == "<= 0.3 s"


# ---------------------------------------------------------------------------------------------
# Compiling the kernels


def test_is_compiled_here_follows_numbas_cache(tmp_path, monkeypatch):
    """A throw-away compiled function: not in the cache before its first call, in it after."""
    from solver.mechanics.kernels import is_compiled_here

    (tmp_path / "throwaway_kernel.py").write_text(
        "import numba\n\n@numba.njit(cache=True)\ndef twice(x):\n    return 2.0 * x\n"
    )
    monkeypatch.syspath_prepend(str(tmp_path))
    module = importlib.import_module("throwaway_kernel")
    assert not is_compiled_here(module.twice)
    assert module.twice(2.0) == 4.0
    assert is_compiled_here(module.twice)


def test_prepare_kernels_reports_each_kernel_with_progress():
    from solver.mechanics.kernels import KERNELS, pending_kernels, prepare_kernels

    calls = []
    done = prepare_kernels(lambda k, total, name: calls.append((k, total, name)))
    assert [c[0] for c in calls] == list(range(len(KERNELS) + 1))
    assert calls[-1] == (len(KERNELS), len(KERNELS), "")
    assert [d.name for d in done] == [k.name for k in KERNELS]
    assert pending_kernels() == []


def test_commands_say_they_prepare_the_solver_when_it_is_not_compiled(monkeypatch, capsys):
    import solver.mechanics.kernels as kernels

    monkeypatch.setattr(kernels, "pending_kernels", lambda: ["Lambert arcs, whole grids"])
    seen = []

    def fake_prepare(progress=None):
        for k in range(len(kernels.KERNELS)):
            progress(k, len(kernels.KERNELS), kernels.KERNELS[k].name)
            seen.append(k)
        progress(len(kernels.KERNELS), len(kernels.KERNELS), "")
        return []

    monkeypatch.setattr(kernels, "prepare_kernels", fake_prepare)
    argv = ["lambert", "--mu-km3-s2", "398600", "--r1-km", "7000,0,0", "--r2-km", "0,8000,0"]
    assert main([*argv, "--tof-s", "3000"]) == 0
    err = capsys.readouterr().err
    assert "preparing the solver, once" in err and "solver ready" in err
    assert len(seen) == len(kernels.KERNELS)


def test_serve_prepares_the_solver_before_it_serves(monkeypatch, capsys):
    import waitress

    import app.dashboard as dashboard
    import solver.mechanics.kernels as kernels

    order = []
    monkeypatch.setattr(kernels, "pending_kernels", lambda: ["Lambert arcs, whole grids"])
    monkeypatch.setattr(kernels, "prepare_kernels", lambda progress=None: order.append("prepare"))

    class FakeApp:
        server = object()

    monkeypatch.setattr(dashboard, "create_app", lambda **kw: order.append("app") or FakeApp())
    monkeypatch.setattr(waitress, "serve", lambda *a, **kw: order.append("serve"))
    assert main(["serve", "--port", "8765"]) == 0
    assert order == ["prepare", "app", "serve"]
    assert "preparing the solver, once" in capsys.readouterr().err


@pytest.mark.slow
def test_a_cold_cache_compiles_with_a_message_and_progress(tmp_path):
    """A real first run: numba's cache pointed at an empty folder, as on a fresh machine."""
    env = {**os.environ, "NUMBA_CACHE_DIR": str(tmp_path / "numba")}
    argv = ["lambert", "--mu-km3-s2", "398600", "--r1-km", "7000,0,0", "--r2-km", "0,8000,0"]
    proc = subprocess.run(
        [sys.executable, "-m", "app.cli", *argv, "--tof-s", "3000"],
        cwd=REPO,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
    )
    assert proc.returncode == 0, proc.stderr
    assert "preparing the solver, once" in proc.stderr
    assert "kernel" in proc.stderr and "solver ready" in proc.stderr
    again = subprocess.run(
        [sys.executable, "-m", "app.cli", *argv, "--tof-s", "3000"],
        cwd=REPO,
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert again.returncode == 0 and "preparing" not in again.stderr
