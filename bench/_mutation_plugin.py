"""pytest plugin for bench/mutation.py: empty polarflux's per-grid caches before every test.

mutmut runs each mutant in a process forked from one that already ran the tests, so a
cached result computed by the unmutated code (cap rows and weights, longitude widths,
reader axes, all kept per grid) would hide the mutant; and it maps tests to the
functions they call, which a cache hit would hide too. Loaded with ``-p _mutation_plugin``.
"""

from __future__ import annotations

import sys


def _clear_polarflux_caches() -> None:
    for name, module in list(sys.modules.items()):
        if module is None or not (name == "polarflux" or name.startswith("polarflux.")):
            continue
        for attribute, value in list(vars(module).items()):
            if callable(getattr(value, "cache_clear", None)):
                value.cache_clear()
            elif isinstance(value, dict) and attribute.endswith("_cache"):
                value.clear()


def pytest_runtest_setup(item) -> None:
    _clear_polarflux_caches()
