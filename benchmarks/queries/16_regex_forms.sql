-- DuckDB's regexp_matches finds the pattern anywhere; the anchors make it a whole-form match.
SELECT upos, count(*) FROM word WHERE regexp_matches(form, '^[a-z]+(ed|ing)$') GROUP BY upos
