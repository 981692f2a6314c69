-- Inclusion of character spans (the spans were given as token ordinals).
SELECT t.upos, count(*) FROM disfluency d JOIN word t ON d.start <= t.start AND t."end" <= d."end"
WHERE d.label = 'reparandum' GROUP BY t.upos
