-- Inclusion of character spans (the spans were given as word ordinals).
SELECT t.upos, count(*) FROM disfluency d JOIN token t ON d.start <= t.start AND t."end" <= d."end"
WHERE d.label = 'reparandum' GROUP BY t.upos
