-- Scan floor for 08_inner_vowels: one pass over the columns it must read.
SELECT (SELECT sum(hash(label, doc, t_start, t_end)) FROM phones), (SELECT sum(hash(doc, t_start, t_end)) FROM spoken)
