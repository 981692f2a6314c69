-- NOT EXISTS over span inclusion.
SELECT count(*) FROM sentence s
WHERE NOT EXISTS (SELECT 1 FROM word t WHERE t.upos = 'AUX' AND s.start <= t.start AND t."end" <= s."end")
