-- Web access log (common log format) -> lookup log.
-- The packet number is in the path (/packets/N...) or in the query string (packet=N). Requests
-- for anything else (static files) are not lookups; a 404 is still a lookup (a miss).
-- Run from this directory:  advisor recommend DB --table packets --key packet_no \
--     --log-sql access-log/lookups.sql --order-column logged_at
WITH lines AS (
    SELECT
        strptime(regexp_extract(line, '\[([^\]]+)\]', 1), '%d/%b/%Y:%H:%M:%S %z') AS logged_at,
        regexp_extract(line, '"[A-Z]+ ([^ ]+) HTTP', 1) AS url
    FROM read_csv('access-log/access.log', columns = {'line': 'VARCHAR'}, header = false, delim = '\x1f')
)
SELECT
    TRY_CAST(coalesce(nullif(regexp_extract(url, '^/packets/([0-9]+)', 1), ''),
                  nullif(regexp_extract(url, '[?&]packet=([0-9]+)', 1), '')) AS BIGINT) AS packet_no,
    logged_at
FROM lines
WHERE regexp_matches(url, '^/packets/[0-9]+') OR regexp_matches(url, '[?&]packet=[0-9]+')
