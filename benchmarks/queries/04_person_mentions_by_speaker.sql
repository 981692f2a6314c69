-- Inclusion of half-open character spans on the global line.
SELECT s.speaker, count(*) FROM mention m JOIN sentence s
  ON s.start <= m.start AND m."end" <= s."end"
WHERE m.type = 'person' GROUP BY s.speaker
