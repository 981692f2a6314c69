"""pandas baseline for 08_inner_vowels: each phone with the last word starting strictly before it
in the same recording (merge_asof by document), kept if it also ends strictly before the word."""
import pandas as pd


def run(layers):
    p = layers.read("phones", ["label", "doc", "t_start", "t_end"])
    w = layers.read("spoken", ["doc", "t_start", "t_end"])
    p = p[p.label == "AH0"].sort_values("t_start")
    w = w.dropna(subset=["t_start"]).sort_values("t_start")
    pairs = pd.merge_asof(p, w, on="t_start", by="doc", direction="backward",
                          allow_exact_matches=False, suffixes=("", "_w"))
    during = pairs[pairs.t_end < pairs.t_end_w]
    return [(len(during),)]
