-- Through the parent column of the token layer, not the edge set the query uses.
SELECT h.upos, count(*) FROM token d JOIN token h ON d.parent = h.id
WHERE d.deprel = 'amod' GROUP BY h.upos
