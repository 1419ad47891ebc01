"""Browsing commands."""


def register(app) -> None:
    pass
