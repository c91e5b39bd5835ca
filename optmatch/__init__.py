"""optmatch: broadband transmission-line stub matching against a return-loss mask."""

__version__ = "0.1.0"
