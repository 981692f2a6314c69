-- Independent of the stored flag: the mention at the lowest chain position of its chain.
SELECT m.type, count(*) FROM mention m
WHERE m.chain_pos = (SELECT min(chain_pos) FROM mention x WHERE x.chain = m.chain)
GROUP BY m.type
