-- Precedes in one document; words strictly between = n.word_first - f.word_last - 1.
SELECT count(*) FROM token f JOIN token n
  ON f.doc = n.doc AND f."end" <= n.start AND f.start < n."end"
WHERE f.upos = 'INTJ' AND n.upos = 'NOUN' AND greatest(n.word_first - f.word_last - 1, 0) <= 3
