"""pandas baseline for 10_first_mentions: the mention at the lowest position of its chain."""


def run(layers):
    m = layers.read("mention", ["chain", "chain_pos", "type"])
    first = m[m.chain_pos == m.groupby("chain").chain_pos.transform("min")]
    return first.groupby("type", dropna=False).size().reset_index()
