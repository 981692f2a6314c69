-- Scan floor for 03_amod_heads: one pass over the columns it must read.
SELECT count(*), sum(hash(id, parent, deprel, upos)) FROM word
