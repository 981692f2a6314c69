-- Scan floor for 16_regex_forms: one pass over the columns it must read.
SELECT count(*), sum(hash(form, upos)) FROM word
