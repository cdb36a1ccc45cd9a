"""The compiled kernels' cache folder follows the engine's source (solver/_compiled_cache.py).

numba's own cache checks only the file a kernel is written in; a kernel that calls a compiled
function from another module kept the old code after that function changed. The folder is named
after a digest of all of the engine's source, so a change anywhere in it compiles afresh.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from solver._compiled_cache import ENV_CACHE_DIR, source_digest

ROOT = Path(__file__).resolve().parents[1]


def _package(folder: Path, files: dict[str, str]) -> Path:
    for name, text in files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    return folder


def test_any_change_to_any_source_file_changes_the_digest(tmp_path):
    files = {"a.py": "x = 1\n", "sub/b.py": "def f():\n    return 2\n"}
    base = source_digest(_package(tmp_path / "one", files))
    assert source_digest(_package(tmp_path / "same", files)) == base
    changed = dict(files, **{"sub/b.py": "def f():\n    return 3\n"})
    assert source_digest(_package(tmp_path / "callee", changed)) != base
    added = dict(files, **{"sub/c.py": ""})
    assert source_digest(_package(tmp_path / "added", added)) != base
    renamed = {"a.py": files["a.py"], "sub/b2.py": files["sub/b.py"]}
    assert source_digest(_package(tmp_path / "renamed", renamed)) != base
    # compiled files beside the source are not source
    (tmp_path / "one" / "__pycache__").mkdir()
    (tmp_path / "one" / "__pycache__" / "a.nbi").write_bytes(b"\x00")
    assert source_digest(tmp_path / "one") == base


def _numba_cache_dir(env: dict[str, str]) -> dict:
    code = (
        "import json, numba, solver, numba.core.config as c, os;"
        "print(json.dumps({'config': c.CACHE_DIR, 'env': os.environ.get('NUMBA_CACHE_DIR')}))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True, text=True, check=True
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_the_engine_points_numba_at_the_folder_of_its_source():
    env = {k: v for k, v in os.environ.items() if k != ENV_CACHE_DIR}
    found = _numba_cache_dir(env)  # numba imported before the engine: told all the same
    digest = source_digest(ROOT / "solver")
    assert found["config"] == found["env"]
    assert Path(found["config"]).name == f"numba-{digest}"


def test_a_cache_folder_chosen_by_the_user_is_kept(tmp_path):
    env = dict(os.environ, **{ENV_CACHE_DIR: str(tmp_path / "mine")})
    found = _numba_cache_dir(env)
    assert found["config"] == found["env"] == str(tmp_path / "mine")
