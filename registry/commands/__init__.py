"""One module per ``prespec`` command; each exports ``<name>(...) -> int``."""
