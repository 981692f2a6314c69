"""pandas baseline for 06_vp_under_sbar: SBAR and VP constituents merged on their sentence, then
the pre/post-order interval test."""


def run(layers):
    tr = layers.read("tree", ["cat", "sent", "pre", "post"])
    pairs = tr[tr.cat == "SBAR"].merge(tr[tr.cat == "VP"], on="sent", suffixes=("_s", "_v"))
    under = pairs[(pairs.pre_s < pairs.pre_v) & (pairs.post_v < pairs.post_s)]
    return [(len(under),)]
