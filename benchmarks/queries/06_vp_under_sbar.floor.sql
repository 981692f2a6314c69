-- Scan floor for 06_vp_under_sbar: one pass over the columns it must read.
SELECT count(*), sum(hash(cat, pre, post)) FROM tree
