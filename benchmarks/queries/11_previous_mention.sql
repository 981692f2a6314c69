-- Consecutive positions in one chain.
SELECT count(*) FROM mention a JOIN mention b ON a.chain = b.chain AND a.chain_pos = b.chain_pos - 1
WHERE a.type = 'person'
