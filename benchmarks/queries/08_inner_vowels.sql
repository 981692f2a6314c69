-- Allen (1983) during: strictly later start and strictly earlier end, same recording.
SELECT count(*) FROM phones p JOIN spoken w
  ON p.doc = w.doc AND w.t_start < p.t_start AND p.t_end < w.t_end
WHERE p.label = 'AH0'
