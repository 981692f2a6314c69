-- Scan floor for 14_long_gaps: one pass over the columns it must read.
SELECT count(*), sum(hash(doc, ord, t_start, t_end, speaker)) FROM spoken
