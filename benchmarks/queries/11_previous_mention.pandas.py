"""pandas baseline for 11_previous_mention: a merge on chain and the next chain position."""


def run(layers):
    m = layers.read("mention", ["chain", "chain_pos", "type"])
    a = m[m.type == "person"].assign(next_pos=lambda d: d.chain_pos + 1)
    pairs = a.merge(m, left_on=["chain", "next_pos"], right_on=["chain", "chain_pos"])
    return [(len(pairs),)]
