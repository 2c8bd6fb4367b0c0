"""A CSV edge list: one row per synapse, pre -> post."""

import csv
import io

__all__ = ["edge_csv_text", "write_edge_csv"]


def edge_csv_text(G):
    """Columns pre, post, pre_population, post_population, synapse, weight
    (repr floats, exact), and pre_unit_id, post_unit_id when the units are
    named (empty for interneurons; quoted by the csv module as needed)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    named = any("unit_id" in a for _, a in G.nodes(data=True))
    w.writerow(["pre", "post", "pre_population", "post_population", "synapse",
                "weight"] + (["pre_unit_id", "post_unit_id"] if named else []))
    for u, v, attrs in G.edges(data=True):
        w.writerow([u, v, G.nodes[u]["population"], G.nodes[v]["population"],
                    attrs["synapse"], repr(float(attrs["weight"]))]
                   + ([G.nodes[u].get("unit_id", ""), G.nodes[v].get("unit_id", "")]
                      if named else []))
    return buf.getvalue()


def write_edge_csv(G, path):
    with open(path, "w", encoding="utf-8", newline="") as fh:
        fh.write(edge_csv_text(G))
