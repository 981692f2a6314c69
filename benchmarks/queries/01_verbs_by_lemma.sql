-- Hand-written reference for 01_verbs_by_lemma.
SELECT lemma, count(*) FROM word WHERE upos = 'VERB' GROUP BY lemma
