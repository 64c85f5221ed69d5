"""The coding protocol: plan, draw and assign the reliability sample; score and trend rounds.

Pure logic (no typer, no printing); the commands in :mod:`coderel.cli` are thin layers over it.
"""
