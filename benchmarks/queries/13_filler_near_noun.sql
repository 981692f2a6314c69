-- Precedes in one document; tokens strictly between = n.tok_first - f.tok_last - 1.
SELECT count(*) FROM word f JOIN word n
  ON f.doc = n.doc AND f."end" <= n.start AND f.start < n."end"
WHERE f.upos = 'INTJ' AND n.upos = 'NOUN' AND greatest(n.tok_first - f.tok_last - 1, 0) <= 3
