"""Renderers: terminal tables, JSON records; the library computes, these only format."""

from .jsonfile import outcomes_document, write_json
from .terminal import render_table, render_summary

__all__ = ["outcomes_document", "write_json", "render_table", "render_summary"]
