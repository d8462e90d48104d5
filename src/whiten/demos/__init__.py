"""Invented demo scenarios with fixed seeds (what ``whiten demo`` runs).

Each scenario module offers ``run(out: pathlib.Path) -> list[str]``: it writes
its files into ``out`` and returns the lines of a short plain-words account.
"""
