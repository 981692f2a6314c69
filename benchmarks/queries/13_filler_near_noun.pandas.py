"""pandas baseline for 13_filler_near_noun: fillers and nouns merged on the document, then the
order test and the count of tokens between them."""


def run(layers):
    t = layers.read("word", ["upos", "doc", "start", "end", "tok_first", "tok_last"])
    pairs = t[t.upos == "INTJ"].merge(t[t.upos == "NOUN"], on="doc", suffixes=("_f", "_n"))
    between = (pairs.tok_first_n - pairs.tok_last_f - 1).clip(lower=0)
    near = pairs[(pairs.end_f <= pairs.start_n) & (pairs.start_f < pairs.end_n) & (between <= 3)]
    return [(len(near),)]
