-- Dominance: the ancestor's pre/post interval encloses the descendant's.
SELECT count(*) FROM tree s JOIN tree v ON s.pre < v.pre AND v.post < s.post
WHERE s.cat = 'SBAR' AND v.cat = 'VP'
