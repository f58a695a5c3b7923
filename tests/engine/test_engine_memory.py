"""Memory does not grow with the number of paths, under every method: blocks are made and
consumed one at a time (tracemalloc peaks), and a subprocess pricing a million 252-date
paths stays within the bound the engine docstring states (peak resident memory)."""

import subprocess
import sys
import tracemalloc

import pytest

from limitcase import BLOCK, price
from limitcase_payoffs.asians import ArithmeticAsianCall

from .conftest import MODEL


def _peak(paths, method):
    p = ArithmeticAsianCall(fixings=52)
    price(p, MODEL, paths=BLOCK, seed=1, method=method)  # warm caches (Sobol engines, imports)
    tracemalloc.start()
    price(p, MODEL, paths=paths, seed=1, method=method)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


@pytest.mark.parametrize("method", ["antithetic", "sobol", "control", "auto"])
def test_peak_allocation_does_not_grow_with_paths(method, monkeypatch):
    """With the per-process cache of Sobol blocks held to 4 MB (its budget is fixed, 64 MB
    by default, whatever the path count), 24 blocks of 52 dates (41 MB) peak like 2."""
    from limitcase import sampling

    monkeypatch.setattr(sampling, "BLOCK_CACHE_BYTES", 4 << 20)
    sampling._BLOCKS.clear()
    sampling._BLOCK_BYTES[0] = 0
    small, large = _peak(2 * BLOCK, method), _peak(24 * BLOCK, method)
    assert large <= 1.1 * small + (4 << 20)
    assert large < 16 * BLOCK * 52 * 8 + (4 << 20)  # a few block-sized arrays, whatever the path count
    assert sampling._BLOCK_BYTES[0] <= 4 << 20


SCRIPT = """
import resource, sys
from limitcase import BlackScholes, price
from limitcase_payoffs.asians import ArithmeticAsianCall
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
p = ArithmeticAsianCall(fixings=252)
e = price(p, BlackScholes(), paths=int(sys.argv[1]), seed=1, method=sys.argv[2])
after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(before, after)
"""


def test_resident_memory_of_a_large_run():
    """49,152 paths x 252 dates with control variates: 12 block-sized arrays of
    BLOCK x 252 x 8 bytes (8.3 MB each) if the paths were held at once; the resident set
    grows by less than 8 of them (measured: about 1; Sobol points through the bridge, about
    5, are covered by the tracemalloc test above and benchmarks/memory.py)."""
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(12 * BLOCK), "control"], capture_output=True,
                         text=True, check=True)
    before, after = map(int, out.stdout.split())
    grown_mb = (after - before) / 2**10
    assert grown_mb < 8 * BLOCK * 252 * 8 / 2**20, grown_mb
