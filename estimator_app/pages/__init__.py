"""One module per page; each has ``render()``."""
