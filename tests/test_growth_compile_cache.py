"""The compiled growth step keeps a writable numba cache even where the package folder is read-only."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

from rootsim.growth import compile_cache


def test_unwritable_package_and_user_folders_fall_back_to_a_temporary_folder(monkeypatch, tmp_path):
    from numba.core import config

    monkeypatch.setattr(config, "CACHE_DIR", "")
    blocked = {Path(compile_cache.__file__).resolve().parent / "__pycache__", compile_cache._user_cache_folder()}
    real = compile_cache._writable
    monkeypatch.setattr(compile_cache, "_writable", lambda folder: folder not in blocked and real(folder))
    monkeypatch.setattr(compile_cache.tempfile, "gettempdir", lambda: str(tmp_path))
    folder = compile_cache.ensure_writable_cache()
    assert folder.parent == tmp_path and config.CACHE_DIR == str(folder) and real(folder)


def test_an_explicit_numba_cache_dir_is_used_as_given(monkeypatch, tmp_path):
    from numba.core import config

    monkeypatch.setattr(config, "CACHE_DIR", str(tmp_path / "given"))
    assert compile_cache.ensure_writable_cache() == tmp_path / "given"


def test_a_fresh_process_writes_the_cache_where_it_was_told(tmp_path):
    # numba's own cache index files (*.nbi) appear in NUMBA_CACHE_DIR once a cached kernel has run.
    code = ("from rootsim.growth.tropisms import tangent_variance\n"
            "import numpy as np\n"
            "print(tangent_variance(np.array([0.01, 1.0]))[0])\n")
    root = Path(__file__).resolve().parents[1]
    env = {"PATH": "/usr/bin:/bin", "PYTHONPATH": str(root), "NUMBA_CACHE_DIR": str(tmp_path / "cache"),
           "HOME": str(tmp_path)}
    subprocess.run([sys.executable, "-c", code], env=env, check=True, capture_output=True, timeout=300)
    assert list((tmp_path / "cache").rglob("*.nbi"))


def test_compiled_code_is_dropped_when_another_source_file_of_the_package_changes(tmp_path):
    # numba checks a cached function against its own file only; a kernel it calls may live in another file
    # (rootsim/soil/fields.py for the growth step), so the package drops its cached code when any source changed.
    import shutil

    root = Path(__file__).resolve().parents[1]
    copy = tmp_path / "src"
    shutil.copytree(root / "rootsim", copy / "rootsim", ignore=shutil.ignore_patterns("__pycache__"))
    env = {"PATH": "/usr/bin:/bin", "PYTHONPATH": str(copy), "NUMBA_CACHE_DIR": str(tmp_path / "cache"),
           "HOME": str(tmp_path)}
    code = ("from rootsim.growth.tropisms import tangent_variance\n"
            "import numpy as np\n"
            "print(tangent_variance(np.array([0.01, 1.0]))[0])\n")
    subprocess.run([sys.executable, "-c", code], env=env, check=True, capture_output=True, timeout=300, cwd=tmp_path)
    cached = list((tmp_path / "cache").rglob("tropisms.tangent_variance*.nbi"))
    assert cached
    subprocess.run([sys.executable, "-c", "import rootsim.growth"], env=env, check=True, capture_output=True,
                   timeout=300, cwd=tmp_path)
    assert all(p.exists() for p in cached)  # nothing changed: the cache stays
    with open(copy / "rootsim" / "soil" / "fields.py", "a", encoding="utf-8") as handle:
        handle.write("\n# edited\n")
    subprocess.run([sys.executable, "-c", "import rootsim.growth"], env=env, check=True, capture_output=True,
                   timeout=300, cwd=tmp_path)
    assert not any(p.exists() for p in cached)
