"""pandas baseline for 15_mean_gap_by_speaker: consecutive words by ordinal, mean gap and count."""


def run(layers):
    w = layers.read("spoken", ["doc", "ord", "t_start", "t_end", "speaker"])
    pairs = w.assign(next_ord=w.ord + 1).merge(w, left_on=["doc", "next_ord"], right_on=["doc", "ord"],
                                               suffixes=("_a", "_b"))
    pairs["gap"] = pairs.t_start_b - pairs.t_end_a                     # whole microseconds
    out = pairs.groupby("speaker_b", dropna=False).gap.agg(["mean", "size"]).reset_index()
    out["mean"] = out["mean"] / 1e6                                      # seconds, as strata shows them
    return out
