-- Adjacent tokens: consecutive ordinals in one document.
SELECT count(*) FROM token a JOIN token n ON n.ord = a.ord + 1 AND n.doc = a.doc
WHERE a.upos = 'ADJ' AND n.upos = 'NOUN'
