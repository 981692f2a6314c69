-- Through the parent column of the word layer, not the edge set the query uses.
SELECT h.upos, count(*) FROM word d JOIN word h ON d.parent = h.id
WHERE d.deprel = 'amod' GROUP BY h.upos
