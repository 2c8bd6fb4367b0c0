"""Exports of a circuit, one module a format; simulators are imported only
inside their own functions."""

from .edges_csv import write_edge_csv
from .graph_files import read_graphml, read_json, write_graphml, write_json

FORMATS = ("graphml", "json", "csv")

__all__ = ["FORMATS", "read_graphml", "read_json", "write_edge_csv",
           "write_graphml", "write_json"]
