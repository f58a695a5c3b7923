"""The dossier's data, computed by the library and rendered by :mod:`limitcase.report`:
:func:`build_dossier` fills the plain records of :mod:`limitcase.document.records`;
:func:`describe_product` describes a product class as declared (``limitcase list``)."""

from .build import REPORT_PATHS, build_dossier, load_mutations
from .describe import describe_product, source_of
from .records import Dossier, MutationSummary, ProductDescription, ProductPage

__all__ = ["REPORT_PATHS", "build_dossier", "load_mutations", "describe_product", "source_of",
           "Dossier", "MutationSummary", "ProductDescription", "ProductPage"]
