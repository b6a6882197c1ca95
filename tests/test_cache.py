"""Compiled kernels are cached in the user's cache folder, never inside the package: pip
leaves files it did not install behind when it uninstalls, and the leftover package
folder then hides a later (editable) install."""

import os
import subprocess
import sys
from pathlib import Path

import pytest

import tricharge
from tricharge.cache import CACHE_VARIABLE, numba_cache_dir

PACKAGE = Path(tricharge.__file__).resolve().parent

#: Compiles and runs the near-field kernel on a small cube; prints numba's own cache
#: setting afterwards (it must be left as it was).
RUN_KERNEL = """
import numba, numpy as np
from tricharge import shapes
from tricharge.bem.kernels import near_values
from tricharge.bem.nearfield import FAST_POLICY, kernel_arrays, near_pairs
from tricharge.bem.panels import make_panels
panels = make_panels(*shapes.cube(1.0, 2))
i, j, rel = near_pairs(panels.centroids, panels, FAST_POLICY.corrected_within)
values = near_values(panels.centroids, i, j, rel, *kernel_arrays(panels, FAST_POLICY), True)
print(repr(numba.config.CACHE_DIR), bool(len(values)) and bool(np.isfinite(values).all()))
"""


def _numba_files(folder: Path) -> dict[Path, int]:
    """numba's cache files (index .nbi, code .nbc) below ``folder`` with their mtimes."""
    return {p: p.stat().st_mtime_ns for p in folder.rglob("*") if p.suffix in (".nbi", ".nbc")}


def _run_kernel(tmp_path: Path, cache_dir: Path) -> list[str]:
    env = {k: v for k, v in os.environ.items() if k not in ("NUMBA_CACHE_DIR", CACHE_VARIABLE)}
    env[CACHE_VARIABLE] = str(cache_dir)
    run = subprocess.run([sys.executable, "-c", RUN_KERNEL], env=env, cwd=tmp_path, capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    return run.stdout.split()


@pytest.mark.smoke
def test_kernels_are_cached_in_the_cache_folder_and_never_in_the_package(tmp_path):
    before = _numba_files(PACKAGE)
    assert _run_kernel(tmp_path, tmp_path / "cache") == ["''", "True"]
    cached = _numba_files(tmp_path / "cache" / "numba")
    assert {p.suffix for p in cached} == {".nbi", ".nbc"}
    assert {p.name.split("-")[0] for p in cached} >= {"kernels.near_values", "kernels._closed_form"}
    assert _numba_files(PACKAGE) == before


def test_without_a_writable_cache_folder_kernels_compile_uncached(tmp_path):
    """A cache folder that cannot be made (below a regular file, refused even to root)."""
    (tmp_path / "a file").write_text("")
    before = _numba_files(PACKAGE)
    assert _run_kernel(tmp_path, tmp_path / "a file" / "cache") == ["''", "True"]
    assert _numba_files(tmp_path) == {}
    assert _numba_files(PACKAGE) == before


@pytest.fixture
def clean_env(monkeypatch, tmp_path):
    for name in (CACHE_VARIABLE, "XDG_CACHE_HOME", "NUMBA_CACHE_DIR"):
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    return monkeypatch


def test_cache_folder_is_below_the_users_cache_folder(clean_env, tmp_path):
    assert numba_cache_dir() == tmp_path / "home" / ".cache" / "tricharge" / "numba"
    clean_env.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert numba_cache_dir() == tmp_path / "xdg" / "tricharge" / "numba"
    assert (tmp_path / "xdg" / "tricharge" / "numba").is_dir()
    clean_env.setenv("XDG_CACHE_HOME", "relative/path")  # ignored, as the XDG rules say
    assert numba_cache_dir() == tmp_path / "home" / ".cache" / "tricharge" / "numba"


def test_own_variable_first_then_numbas_setting(clean_env, tmp_path):
    assert numba_cache_dir(str(tmp_path / "numba's")) == tmp_path / "numba's"
    clean_env.setenv(CACHE_VARIABLE, str(tmp_path / "ours"))
    assert numba_cache_dir(str(tmp_path / "numba's")) == tmp_path / "ours" / "numba"


def test_unwritable_folders_mean_no_cache(clean_env, tmp_path):
    (tmp_path / "a file").write_text("")
    assert numba_cache_dir(str(tmp_path / "a file" / "x")) is None
    clean_env.setenv(CACHE_VARIABLE, str(tmp_path / "a file" / "y"))
    assert numba_cache_dir() is None
