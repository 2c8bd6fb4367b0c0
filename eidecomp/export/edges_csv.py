"""A CSV edge list: one row per synapse, pre -> post."""

import csv
import io

__all__ = ["edge_csv_text", "write_edge_csv"]


def edge_csv_text(G):
    """Columns pre, post, pre_population, post_population, synapse, weight
    (repr floats, exact)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["pre", "post", "pre_population", "post_population", "synapse",
                "weight"])
    for u, v, attrs in G.edges(data=True):
        w.writerow([u, v, G.nodes[u]["population"], G.nodes[v]["population"],
                    attrs["synapse"], repr(float(attrs["weight"]))])
    return buf.getvalue()


def write_edge_csv(G, path):
    with open(path, "w", encoding="utf-8", newline="") as fh:
        fh.write(edge_csv_text(G))
