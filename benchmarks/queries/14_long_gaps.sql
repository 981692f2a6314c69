-- Consecutive ordinals in one document; gap = start of the second minus end of the first (times are whole microseconds).
SELECT a.speaker, count(*) FROM spoken a JOIN spoken b ON b.ord = a.ord + 1 AND b.doc = a.doc
WHERE b.t_start - a.t_end > 300000 GROUP BY a.speaker
