"""The mutation run prices a mutant's check only up to the first block on which a
path-by-path identity breaks (the check fails whatever the other blocks give): every
mutant's fate must be that of pricing every block. (Which case is named as the detector may
differ between two runs either way: a mutant's checks run cheapest first, by the CPU seconds
its original's took, and stop at the first certain failure.)"""

from __future__ import annotations

import pytest

from limitcase.loader import load_products
from limitcase.mutate import run_mutation
from limitcase.mutate import running

PRODUCTS = ("CashOrNothingCall", "DownAndOutPut", "ArithmeticAsianCall", "SpreadCall")


def test_stopping_at_the_first_broken_block_changes_no_mutant_s_fate(monkeypatch):
    classes = [c for c in load_products(()) if c.__name__ in PRODUCTS]
    assert len(classes) == len(PRODUCTS)
    kw = dict(paths=12_000, quick_paths=9_000, equivalence_paths=4096, workers=1)
    fast = run_mutation(classes, **kw)
    real = running.run_check

    def every_block(*args, **kwargs):
        kwargs["stop_at_broken_identity"] = False
        return real(*args, **kwargs)

    monkeypatch.setattr(running, "run_check", every_block)
    slow = run_mutation(classes, **kw)
    assert [(r.id, r.status) for r in fast.results] == [(r.id, r.status) for r in slow.results]
    shortcut = [r for r in fast.results if r.status == "caught" and "identity broken on" in r.message
                and "of 4096 paths" in r.message]
    assert shortcut  # some identity broke in the first block, and pricing stopped there
