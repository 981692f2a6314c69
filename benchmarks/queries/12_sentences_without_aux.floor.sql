-- Scan floor for 12_sentences_without_aux: one pass over the columns it must read.
SELECT (SELECT sum(hash(start, "end")) FROM sentence), (SELECT sum(hash(upos, start, "end")) FROM word)
