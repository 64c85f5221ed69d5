"""coderel: reliability of coded narrative data, from codebook to reconciled dataset and report."""

from coderel._version import __version__
from coderel.codebook import Codebook, Variable
from coderel.codings import Codings
from coderel.problems import Problem, Problems

__all__ = ["Codebook", "Codings", "Problem", "Problems", "Variable", "__version__"]

# The rest of the public API is imported on first use, so that ``import coderel`` stays light.
_LAZY = {
    "load_codebook": "coderel.codebook.load",
    "read_codings": "coderel.io.read",
    "validate": "coderel.validate",
    "write_templates": "coderel.template",
    "agreement": "coderel.agree",
    "build_adjudication": "coderel.adjudicate",
    "merge": "coderel.merge",
    "build_report": "coderel.report",
}


def __getattr__(name: str) -> object:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'coderel' has no attribute {name!r}")
    import importlib

    return getattr(importlib.import_module(module), name)
