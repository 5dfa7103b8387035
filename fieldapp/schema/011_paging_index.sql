-- Schema version 11: keyset paging of the whole log, newest first
-- (GET /api/readings without a site): (taken_at, id) walks this index
-- instead of sorting every reading. A site's pages use readings_site_taken.
CREATE INDEX readings_taken ON readings (taken_at);
