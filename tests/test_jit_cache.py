"""numba's on-disk cache of a compiled function goes stale when a compiled function it calls
from another file changes (numba alone checks only the function's own file, and would go on
serving code compiled with the old callee)."""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

pytest.importorskip("numba")

DEP = textwrap.dedent("""
    from evtkin._jit import plain

    @plain()
    def value():
        return {value}
""")
KERNELS = textwrap.dedent("""
    import cache_dep
    from cache_dep import value
    from evtkin._jit import kernel

    @kernel()
    def through_module():
        return cache_dep.value() * 10

    @kernel()
    def through_name():
        return value() * 100
""")
RUN = ("import cache_kern as k; print(k.through_module(), k.through_name(), "
       "k.through_module.dispatcher.stats.cache_hits.most_common(1) != [])")


def _run(folder: Path) -> str:
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(folder), *sys.path]),
           "NUMBA_CACHE_DIR": str(folder / "cache")}
    done = subprocess.run([sys.executable, "-c", RUN], cwd=folder, env=env,
                          capture_output=True, text=True, timeout=300, check=True)
    return done.stdout.strip()


def test_editing_a_callee_in_another_file_recompiles_its_callers(tmp_path: Path) -> None:
    (tmp_path / "cache_dep.py").write_text(DEP.format(value=1))
    (tmp_path / "cache_kern.py").write_text(KERNELS)
    assert _run(tmp_path) == "10 100 False"  # compiled, nothing cached yet
    assert _run(tmp_path) == "10 100 True"  # loaded from the cache
    # the same size and (within the file system's clock) maybe the same mtime: only the
    # contents tell the edit
    (tmp_path / "cache_dep.py").write_text(DEP.format(value=2))
    assert _run(tmp_path) == "20 200 False"
    assert _run(tmp_path) == "20 200 True"


def test_the_scanners_caches_follow_the_exact_conversion() -> None:
    from evtkin.io import exact_float, hepmc_scan, lhe_scan

    digest = hashlib.sha256(Path(exact_float.__file__).read_bytes()).hexdigest()
    for scanner in (hepmc_scan, lhe_scan):
        kern = scanner.compiled_kernel()
        assert kern is not None
        assert digest in kern._cache._cache_file._source_stamp
