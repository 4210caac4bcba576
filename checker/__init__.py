"""nodegate: DC operating-point checks of circuit designs kept in version control."""

__version__ = "0.1.0"
