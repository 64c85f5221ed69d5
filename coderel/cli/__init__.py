"""Command-line interface: a thin typer layer over the library (it never computes).

Each command lives in its own module ``coderel/cli/cmd_<name>.py`` and registers itself on
:data:`coderel.cli.app.app`; modules are discovered here, so adding a command touches no other file.
"""

from __future__ import annotations

import importlib
import pkgutil

from coderel.cli.app import app

for _info in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
    if _info.name.startswith("cmd_"):
        importlib.import_module(f"{__name__}.{_info.name}")


def main() -> None:
    """Console-script entry point."""
    app()


__all__ = ["app", "main"]
