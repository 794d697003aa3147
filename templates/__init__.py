"""Jinja2 templates for the record pages (shipped as package data)."""
