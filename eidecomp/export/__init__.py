"""Exports of a circuit, one module a format; simulators are imported only
inside their own functions."""

from .edges_csv import write_edge_csv
from .graph_files import read_graphml, read_json, write_graphml, write_json

# file formats, then folder formats (a script and its data)
FILE_FORMATS = ("graphml", "json", "csv", "neuroml")
FOLDER_FORMATS = ("pynn", "nest", "brian2")
FORMATS = FILE_FORMATS + FOLDER_FORMATS

__all__ = ["FILE_FORMATS", "FOLDER_FORMATS", "FORMATS", "read_graphml",
           "read_json", "write_edge_csv", "write_graphml", "write_json"]
