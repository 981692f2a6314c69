-- Every reading of a sentence counts: alternative trees have their own nodes.
SELECT count(*) FROM tree np JOIN word t ON np.start <= t.start AND t."end" <= np."end"
WHERE np.cat = 'NP' AND np.func = 'SBJ' AND t.upos = 'PRON'
