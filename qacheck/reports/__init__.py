"""Renderers: results in, text out; no scoring logic here."""
