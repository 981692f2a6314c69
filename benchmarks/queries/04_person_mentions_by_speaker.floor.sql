-- Scan floor for 04_person_mentions_by_speaker: one pass over the columns it must read.
SELECT (SELECT sum(hash(type, start, "end")) FROM mention), (SELECT sum(hash(start, "end", speaker)) FROM sentence)
