-- Scan floor for 02_adjective_noun: one pass over the columns it must read.
SELECT count(*), sum(hash(doc, ord, upos)) FROM word
