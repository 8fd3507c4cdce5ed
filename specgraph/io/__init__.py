"""Reading networks from tables: CSV and Parquet files, and pandas frames.

Node ids are read as strings, exactly as written. Every error names the file,
line and column it found and says what to do.
"""

from ._frames import network_from_frames
from ._tables import read_edges, read_table

__all__ = ["network_from_frames", "read_edges", "read_table"]
