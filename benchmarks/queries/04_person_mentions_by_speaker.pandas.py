"""pandas baseline for 04_person_mentions_by_speaker: each mention with the last sentence starting
at or before it (merge_asof; sentences do not overlap), kept if it also ends inside it."""
import pandas as pd


def run(layers):
    m = layers.read("mention", ["type", "start", "end"])
    s = layers.read("sentence", ["start", "end", "speaker"])
    m = m[m.type == "person"].sort_values("start")
    s = s.sort_values("start")
    pairs = pd.merge_asof(m, s, on="start", direction="backward", suffixes=("", "_s"))
    inside = pairs[pairs["end"] <= pairs["end_s"]]
    return inside.groupby("speaker", dropna=False).size().reset_index()
