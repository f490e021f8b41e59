"""Jinja2 templates of ikgen's back-ends (shipped as package data as ``ikgen.templates``)."""
