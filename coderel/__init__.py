"""coderel: reliability of coded narrative data, from codebook to reconciled dataset and report."""

from coderel._version import __version__
from coderel.codebook import Codebook, Variable
from coderel.codings import Codings
from coderel.problems import Problem, Problems

__all__ = ["Codebook", "Codings", "Problem", "Problems", "Variable", "__version__"]

# The rest of the public API is imported on first use, so that ``import coderel`` stays light.
# Names differ from their modules' names (``coderel.merge`` is a module; its function is exported
# as ``merge_codings``) so that importing a submodule never shadows a function.
_LAZY: dict[str, tuple[str, str]] = {
    "load_codebook": ("coderel.codebook.load", "load_codebook"),
    "read_codings": ("coderel.io.read", "read_codings"),
    "validate_files": ("coderel.validate", "validate"),
    "write_templates": ("coderel.template", "write_templates"),
    "agreement": ("coderel.agree", "agreement"),
    "build_adjudication": ("coderel.adjudicate", "build_adjudication"),
    "merge_codings": ("coderel.merge", "merge"),
    "build_report": ("coderel.report", "build_report"),
}
__all__ += list(_LAZY)


def __getattr__(name: str) -> object:
    target = _LAZY.get(name)
    if target is None:
        raise AttributeError(f"module 'coderel' has no attribute {name!r}")
    import importlib

    module, attr = target
    return getattr(importlib.import_module(module), attr)
