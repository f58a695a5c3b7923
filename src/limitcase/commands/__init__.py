"""One module per command besides ``check``; each exposes ``command``, a click command."""
