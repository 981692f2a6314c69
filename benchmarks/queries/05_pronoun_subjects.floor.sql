-- Scan floor for 05_pronoun_subjects: one pass over the columns it must read.
SELECT (SELECT sum(hash(cat, func, start, "end")) FROM tree), (SELECT sum(hash(upos, start, "end")) FROM word)
