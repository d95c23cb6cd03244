"""One module per command; each defines a click command named ``command``."""
