-- Scan floor for 10_first_mentions: one pass over the columns it must read.
SELECT count(*), sum(hash(chain, chain_pos, type)) FROM mention
