-- Scan floor for 15_mean_gap_by_speaker: one pass over the columns it must read.
SELECT count(*), sum(hash(doc, ord, t_start, t_end, speaker)) FROM spoken
