-- Adjacent words: consecutive ordinals in one document.
SELECT count(*) FROM word a JOIN word n ON n.ord = a.ord + 1 AND n.doc = a.doc
WHERE a.upos = 'ADJ' AND n.upos = 'NOUN'
