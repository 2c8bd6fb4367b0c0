"""A CSV edge list: one row per synapse, pre -> post.

Columns ``pre``, ``post`` (node names), ``pre_population``,
``post_population``, ``synapse`` (the presynaptic population's kind) and
``weight`` (the nonnegative magnitude, Python's shortest round-trip decimal,
so ``float()`` gives it back bit for bit), then ``pre_unit_id`` and
``post_unit_id`` when the units are named (the unit table's names; empty for
interneurons), then ``pre_feature``, ``post_feature``, ``pre_x``, ``post_x``,
``pre_y``, ``post_y`` for the node attributes the unit table gave (an
interneuron's are its input pool's, :func:`eidecomp.analysis.pool_features`;
an empty cell where a node has none). Written by Python's csv module: every
text cell is wrapped in double quotes, a double quote inside it doubled (RFC
4180, 2.6-2.7); the weight is a bare number.

CSV injection
-------------
A spreadsheet that opens a CSV file reads a cell beginning with ``=``,
``+``, ``-``, ``@``, a tab (0x09) or a carriage return (0x0D) as a formula,
which can run commands or send data away. Following the OWASP "CSV
Injection" guidance (owasp.org/www-community/attacks/CSV_Injection), every
text cell (unit ids, node and population names, synapse kinds; never the
numeric weight) that begins with one of those characters is written with a
single quote in front of it, inside double quotes: ``=1+1`` becomes
``"'=1+1"``. A text cell that already begins with a single quote gets one
more, so the rule can be undone exactly: :func:`restore_cell` drops one
leading single quote. ``raw=True`` (``raw_csv`` of the export registry, the
command line's ``--raw-csv``) writes every cell unchanged.

Examples
--------
>>> neutralise_cell("=HYPERLINK(1)"), neutralise_cell("E0")
("'=HYPERLINK(1)", 'E0')
>>> restore_cell(neutralise_cell("'quoted")) == "'quoted"
True
"""

import csv
import io

from ..graph import POPULATION_COLUMNS, population_table
from ..io.provenance import stamp
from ..params import DEFAULT_PERIOD, TAU_E_MS, TAU_I_MS
from .graph_files import graph_of

__all__ = ["FORMULA_TRIGGERS", "edge_csv_text",
           "neutralise_cell", "population_csv_text", "render_csv",
           "render_populations", "restore_cell", "write_edge_csv"]

FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
"""First characters that make a spreadsheet read a cell as a formula (OWASP
"CSV Injection")."""
_PREFIXED = FORMULA_TRIGGERS + ("'",)


def neutralise_cell(text):
    """``text`` with a single quote in front when it begins with a formula
    trigger or a single quote; unchanged otherwise."""
    return "'" + text if text.startswith(_PREFIXED) else text


def restore_cell(text):
    """The inverse of :func:`neutralise_cell`: the cell as it was given."""
    return text[1:] if text.startswith("'") else text


COLUMNS = ("pre", "post", "pre_population", "post_population", "synapse",
           "weight")
NODE_VALUES = ("feature", "x", "y")
"""Numeric node attributes written, per end of the edge, when present."""

def population_csv_text(circuit):
    """:func:`eidecomp.graph.population_table` as CSV text (the population
    names are the fixed ones of eidecomp.types: nothing to neutralise)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n", quoting=csv.QUOTE_NONNUMERIC)
    w.writerow(POPULATION_COLUMNS)
    for row in population_table(circuit):
        w.writerow([row[c] for c in POPULATION_COLUMNS])
    return buf.getvalue()


def render_populations(circuit, *, features=None, positions=None,
                       unit_ids=None, tau_e=TAU_E_MS, tau_i=TAU_I_MS,
                       raw_csv=False, drive=None,
                       period=DEFAULT_PERIOD):
    """The population-level table (connection probability and mean weight
    per pair of populations) as CSV bytes; nothing else applies."""
    return stamp(population_csv_text(circuit).encode("utf-8"), "hash")


def edge_csv_text(G, *, raw=False):
    """The edge list of a :func:`eidecomp.graph.neuron_graph` as CSV text;
    ``raw`` writes text cells without the CSV-injection quote."""
    cell = str if raw else neutralise_cell
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n", quoting=csv.QUOTE_NONNUMERIC)
    named = any("unit_id" in a for _, a in G.nodes(data=True))
    numeric = [key for key in NODE_VALUES
               if any(key in a for _, a in G.nodes(data=True))]
    w.writerow(list(COLUMNS) + (["pre_unit_id", "post_unit_id"] if named else [])
               + [f"{end}_{key}" for key in numeric for end in ("pre", "post")])
    for u, v, attrs in G.edges(data=True):
        text = [u, v, G.nodes[u]["population"], G.nodes[v]["population"],
                attrs["synapse"]]
        if named:
            text += [G.nodes[u].get("unit_id", ""), G.nodes[v].get("unit_id", "")]
        row = [cell(t) for t in text]
        # the csv module writes a float with repr(): the shortest round trip
        w.writerow(row[:5] + [float(attrs["weight"])] + row[5:]
                   + [G.nodes[n].get(key, "") for key in numeric for n in (u, v)])
    return buf.getvalue()


def render_csv(circuit, *, features=None, positions=None, unit_ids=None,
               tau_e=TAU_E_MS, tau_i=TAU_I_MS, raw_csv=False, drive=None,
               period=DEFAULT_PERIOD):
    """The edge-list CSV file of the circuit, as UTF-8 bytes, with the unit
    table's features and positions per end of each edge (the time constants
    do not apply)."""
    G = graph_of(circuit, features=features, positions=positions,
                 unit_ids=unit_ids, period=period)
    return stamp(edge_csv_text(G, raw=raw_csv).encode("utf-8"), "hash")


def write_edge_csv(G, path, *, raw=False):
    from ..io.staging import any_file, write_file

    return write_file(path, stamp(edge_csv_text(G, raw=raw).encode("utf-8"),
                                  "hash"),
                      force=True,
                      replaceable=any_file)
