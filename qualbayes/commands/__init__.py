"""One module per command: argument definitions (light) and a ``run`` (imports lazily)."""
