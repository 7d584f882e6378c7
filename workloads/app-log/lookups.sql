-- JSON-lines application log -> lookup log with an order column.
-- One object per request; the looked-up packet number is the nested field request.packet and the
-- request time is "at". Requests without a packet (health checks) are not lookups.
-- Run from this directory:  advisor recommend DB --table packets --key packet_no \
--     --log-sql app-log/lookups.sql --order-column logged_at
SELECT
    CAST(json_extract(j, '$.request.packet') AS BIGINT) AS packet_no,
    CAST(json_extract_string(j, '$.at') AS TIMESTAMP) AS logged_at
FROM read_json_objects('app-log/requests.jsonl') AS t(j)
WHERE json_extract(j, '$.request.packet') IS NOT NULL
