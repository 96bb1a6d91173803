"""Rendering: context (pure) -> HTML (jinja2) -> PDF (weasyprint, later)."""
