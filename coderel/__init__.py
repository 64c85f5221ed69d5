"""coderel: reliability of coded narrative data, from codebook to reconciled dataset and report."""

from coderel._version import __version__

__all__ = ["__version__"]

# The public API is imported on first use, so that ``import coderel`` (and ``coderel --help``)
# stays light: pandas, pyarrow and openpyxl load only when a command needs them.
# Names differ from their modules' names (``coderel.merge`` is a module; its function is exported
# as ``merge_codings``) so that importing a submodule never shadows a function.
_LAZY: dict[str, tuple[str, str]] = {
    "Codebook": ("coderel.codebook", "Codebook"),
    "Variable": ("coderel.codebook", "Variable"),
    "Codings": ("coderel.codings", "Codings"),
    "Problem": ("coderel.problems", "Problem"),
    "Problems": ("coderel.problems", "Problems"),
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
