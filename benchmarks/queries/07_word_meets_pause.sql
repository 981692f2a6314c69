-- Allen (1983) meets: end of the first equals start of the second, same recording.
SELECT count(*) FROM spoken w JOIN pauses p ON p.doc = w.doc AND w.t_end = p.t_start
