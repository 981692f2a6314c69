-- Scan floor for 09_reparandum_pos: one pass over the columns it must read.
SELECT (SELECT sum(hash(label, start, "end")) FROM disfluency), (SELECT sum(hash(upos, start, "end")) FROM word)
