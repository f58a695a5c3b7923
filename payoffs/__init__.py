"""The shipped catalogue of products, one module per family.

Import base products from here when declaring your own reductions, e.g.
``from limitcase_payoffs.vanilla import EuropeanCall``.
"""
