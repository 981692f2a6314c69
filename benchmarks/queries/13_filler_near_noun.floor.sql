-- Scan floor for 13_filler_near_noun: one pass over the columns it must read.
SELECT count(*), sum(hash(upos, doc, start, "end", tok_first, tok_last)) FROM word
