"""Registers the blueprints of plan checks, batches, diagrams and the explorer page."""

from __future__ import annotations

from flask import Flask


def init_app(app: Flask) -> None:
    from . import batch, diagram, explorer, verify

    for module in (verify, batch, diagram, explorer):
        app.register_blueprint(module.bp)
