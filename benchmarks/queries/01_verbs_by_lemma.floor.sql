-- Scan floor for 01_verbs_by_lemma: one pass over the columns it must read.
SELECT count(*), sum(hash(upos, lemma)) FROM word
