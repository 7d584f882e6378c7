-- Pre-aggregated counts from another engine -> a counted lookup log.
-- A directory of Parquet files, hive-partitioned by day (counts/day=YYYY-MM-DD/*.parquet), each
-- row (packet_no, n): n lookups of that packet that day, as a GROUP BY elsewhere produced them.
-- Run from this directory:  advisor recommend DB --table packets --key packet_no \
--     --log-sql counts/lookups.sql --count-column n
-- (or, without SQL:  --log counts --count-column n  reads the same directory directly)
SELECT packet_no, sum(n)::BIGINT AS n
FROM read_parquet('counts/*/*.parquet', hive_partitioning = true)
GROUP BY packet_no
