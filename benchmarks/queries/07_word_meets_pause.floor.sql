-- Scan floor for 07_word_meets_pause: one pass over the columns it must read.
SELECT (SELECT sum(hash(doc, t_end)) FROM spoken), (SELECT sum(hash(doc, t_start)) FROM pauses)
