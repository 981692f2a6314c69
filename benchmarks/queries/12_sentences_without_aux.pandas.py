"""pandas baseline for 12_sentences_without_aux: sentences whose id is not the sentence of any
auxiliary (words carry the id of their sentence)."""


def run(layers):
    s = layers.read("sentence", ["id"])
    t = layers.read("word", ["upos", "sent"])
    with_aux = t.loc[t.upos == "AUX", "sent"].unique()
    return [(int((~s.id.isin(with_aux)).sum()),)]
