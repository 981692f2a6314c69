"""pandas baseline for 02_adjective_noun: the next word by ordinal, through a merge."""


def run(layers):
    t = layers.read("word", ["doc", "ord", "upos"])
    adj = t[t.upos == "ADJ"].assign(next_ord=lambda d: d.ord + 1)
    noun = t[t.upos == "NOUN"]
    pairs = adj.merge(noun, left_on=["doc", "next_ord"], right_on=["doc", "ord"])
    return [(len(pairs),)]
