#!/usr/bin/env bash
# Optional: build fmm3dpy 2.1.0 from the registry's source release with OpenMP and install
# it into the active virtual environment, replacing the single-threaded wheel.
#
#   sudo apt-get install -y gfortran ninja-build   # Debian; a Fortran compiler with OpenMP
#   . .venv/bin/activate && bash bench/fmm3dpy_openmp.sh
#
# Measured on this 2-core machine (one lfmm3d pass, precision 1e-4, random points): 20,000
# points 0.74 -> 0.49 s, 63,000 points with 4 densities and gradients 4.84 -> 2.87 s,
# 200,000 points 5.24 -> 3.43 s (the PyPI wheel against this build; a plain source build
# without OpenMP is as fast as the wheel). The threads follow OMP_NUM_THREADS, by default
# one per core; tricharge's sweep workers set it to 1. With this build the multipole
# library beats the direct sum from fewer points: run python bench/farsum.py to see where.
set -euo pipefail
version=2.1.0
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
pip download -q --no-deps --no-binary fmm3dpy "fmm3dpy==$version" -d "$work"
tar xzf "$work/fmm3dpy-$version.tar.gz" -C "$work"
source_dir="$work/fmm3dpy-$version"
# The release's meson.build compiles without OpenMP; add the flag and the dependency.
python3 - "$source_dir/meson.build" <<'PY'
import sys
from pathlib import Path
path = Path(sys.argv[1])
text = path.read_text()
edits = [
    ("f_args = fc.get_supported_arguments(['-w', '-std=legacy'])",
     "f_args = fc.get_supported_arguments(['-w', '-std=legacy', '-fopenmp'])\nomp = dependency('openmp')"),
    ("  fortran_args: f_args,\n", "  fortran_args: f_args,\n  dependencies: [omp],\n"),
    ("    dependencies: [f2py_dep],", "    dependencies: [f2py_dep, omp],"),
]
for old, new in edits:
    if text.count(old) != 1:
        sys.exit(f"fmm3dpy_openmp.sh: meson.build of this release differs ({old.strip()!r} not found once)")
    text = text.replace(old, new)
path.write_text(text)
PY
pip install -q --force-reinstall --no-deps "$source_dir"
python - <<'PY'
import pathlib, subprocess, fmm3dpy
library = next(pathlib.Path(fmm3dpy.__file__).parent.glob("lfmm3d_fortran*.so"))
linked = subprocess.run(["ldd", str(library)], capture_output=True, text=True).stdout
print("fmm3dpy with OpenMP installed" if "libgomp" in linked else "fmm3dpy installed, but WITHOUT OpenMP")
PY
