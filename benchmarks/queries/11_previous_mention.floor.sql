-- Scan floor for 11_previous_mention: one pass over the columns it must read.
SELECT count(*), sum(hash(chain, chain_pos, type)) FROM mention
