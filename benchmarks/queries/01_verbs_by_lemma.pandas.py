"""pandas baseline for 01_verbs_by_lemma: filter, then group and count."""


def run(layers):
    t = layers.read("word", ["upos", "lemma"])
    return t[t.upos == "VERB"].groupby("lemma", dropna=False).size().reset_index()
