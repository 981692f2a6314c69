"""pandas baseline for 03_amod_heads: dependents merged with their heads on the parent id."""


def run(layers):
    t = layers.read("word", ["id", "parent", "deprel", "upos"])
    dep = t[t.deprel == "amod"]
    pairs = dep.merge(t[["id", "upos"]], left_on="parent", right_on="id", suffixes=("", "_head"))
    return pairs.groupby("upos_head", dropna=False).size().reset_index()
