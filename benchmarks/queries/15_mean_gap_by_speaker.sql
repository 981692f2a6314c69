-- avg over consecutive pairs of one document, with the pair count, per speaker of the second word.
SELECT b.speaker, avg(b.t_start - a.t_end) / 1e6, count(*) FROM spoken a JOIN spoken b
  ON b.ord = a.ord + 1 AND b.doc = a.doc GROUP BY b.speaker
