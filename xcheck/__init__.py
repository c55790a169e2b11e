"""xcheck: compare a measured ring-down or step trace with SPICE and closed-form theory."""

__version__ = "0.1.0"
