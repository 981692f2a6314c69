"""pandas baseline for 05_pronoun_subjects: subject NPs and pronouns merged on their sentence,
then the span test."""


def run(layers):
    np_ = layers.read("tree", ["cat", "func", "sent", "start", "end"])
    t = layers.read("word", ["upos", "sent", "start", "end"])
    np_ = np_[(np_.cat == "NP") & (np_.func == "SBJ")]
    t = t[t.upos == "PRON"]
    pairs = np_.merge(t, on="sent", suffixes=("_np", "_t"))
    inside = pairs[(pairs.start_np <= pairs.start_t) & (pairs.end_t <= pairs.end_np)]
    return [(len(inside),)]
