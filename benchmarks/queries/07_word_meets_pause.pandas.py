"""pandas baseline for 07_word_meets_pause: an equality merge of word ends and pause starts."""


def run(layers):
    w = layers.read("spoken", ["doc", "t_end"])
    p = layers.read("pauses", ["doc", "t_start"])
    pairs = w.merge(p, left_on=["doc", "t_end"], right_on=["doc", "t_start"])
    return [(len(pairs),)]
