-- SQL statement log -> point lookups and range scans.
-- Each line: a timestamp, then one statement. "packet_no = N" is one point lookup, "packet_no IN
-- (a, b, ...)" one lookup per listed value, "packet_no BETWEEN a AND b" one range scan from a to
-- b (the scan_to column; NULL for point lookups). Statements on other tables are ignored.
-- Run from this directory:  advisor recommend DB --table packets --key packet_no \
--     --log-sql sql-log/lookups.sql --scan-to scan_to --order-column logged_at
WITH lines AS (
    SELECT
        CAST(left(line, 19) AS TIMESTAMP) AS logged_at,
        substr(line, 21) AS stmt,
        row_number() OVER () AS seq
    FROM read_csv('sql-log/statements.log', columns = {'line': 'VARCHAR'}, header = false, delim = '\x1f')
    WHERE regexp_matches(line, '(?i)from\s+packets\s+where')
),
points AS (
    SELECT logged_at, seq, TRY_CAST(regexp_extract(stmt, '(?i)packet_no\s*=\s*([0-9]+)', 1) AS BIGINT) AS packet_no
    FROM lines WHERE regexp_matches(stmt, '(?i)packet_no\s*=\s*[0-9]+')
),
lists AS (
    SELECT logged_at, seq, TRY_CAST(unnest(regexp_extract_all(
        regexp_extract(stmt, '(?i)packet_no\s+in\s*\(([^)]*)\)', 1), '([0-9]+)', 1)) AS BIGINT) AS packet_no
    FROM lines WHERE regexp_matches(stmt, '(?i)packet_no\s+in\s*\(')
),
ranges AS (
    SELECT logged_at, seq,
        TRY_CAST(regexp_extract(stmt, '(?i)between\s+([0-9]+)\s+and\s+([0-9]+)', 1) AS BIGINT) AS packet_no,
        TRY_CAST(regexp_extract(stmt, '(?i)between\s+([0-9]+)\s+and\s+([0-9]+)', 2) AS BIGINT) AS scan_to
    FROM lines WHERE regexp_matches(stmt, '(?i)packet_no\s+between')
)
SELECT packet_no, NULL::BIGINT AS scan_to, logged_at, seq FROM points
UNION ALL SELECT packet_no, NULL::BIGINT, logged_at, seq FROM lists
UNION ALL SELECT packet_no, scan_to, logged_at, seq FROM ranges
