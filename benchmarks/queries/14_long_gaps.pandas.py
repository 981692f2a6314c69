"""pandas baseline for 14_long_gaps: each word merged with the next one by ordinal."""


def run(layers):
    w = layers.read("spoken", ["doc", "ord", "t_start", "t_end", "speaker"])
    pairs = w.assign(next_ord=w.ord + 1).merge(w, left_on=["doc", "next_ord"], right_on=["doc", "ord"],
                                               suffixes=("_a", "_b"))
    long = pairs[pairs.t_start_b - pairs.t_end_a > 300_000]          # times are whole microseconds
    return long.groupby("speaker_a", dropna=False).size().reset_index()
