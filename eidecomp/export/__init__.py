"""Exports of a circuit, one module a format, listed in
:mod:`eidecomp.export.registry`; simulators are imported only inside their
own functions."""

from .edges_csv import write_edge_csv
from .graph_files import read_graphml, read_json, write_graphml, write_json
from .registry import (
    FILE_FORMATS,
    FOLDER_FORMATS,
    FORMATS,
    REGISTRY,
    ExportFormat,
    get_format,
    render,
    require_module,
)

__all__ = ["FILE_FORMATS", "FOLDER_FORMATS", "FORMATS", "REGISTRY",
           "ExportFormat", "get_format", "read_graphml", "read_json", "render",
           "require_module", "write_edge_csv", "write_graphml", "write_json"]
