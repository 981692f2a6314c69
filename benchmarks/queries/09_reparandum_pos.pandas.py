"""pandas baseline for 09_reparandum_pos: each word with the last reparandum starting at or
before it (merge_asof), kept if it also ends inside it."""
import pandas as pd


def run(layers):
    d = layers.read("disfluency", ["label", "start", "end"])
    t = layers.read("word", ["upos", "start", "end"])
    d = d[d.label == "reparandum"].sort_values("start")
    pairs = pd.merge_asof(t.sort_values("start"), d, on="start", direction="backward", suffixes=("", "_d"))
    inside = pairs[pairs["end"] <= pairs["end_d"]]
    return inside.groupby("upos", dropna=False).size().reset_index()
