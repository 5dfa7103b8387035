-- Schema version 11 on PostgreSQL: the same index as ../011_paging_index.sql
-- (keyset paging of the whole log, newest first, by (taken_at, id)).
CREATE INDEX readings_taken ON readings (taken_at);
