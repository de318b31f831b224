"""Reading and writing networks and results. Everything here validates at the edge."""

from .tables import read_tables

__all__ = ["read_tables"]
