"""The handbook's theme: jinja2 templates and CSS (package data)."""
