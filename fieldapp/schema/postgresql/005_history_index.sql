-- Schema version 5 on PostgreSQL: the same index as ../005_history_index.sql (the
-- history check reads a site's latest readings of one kind).
CREATE INDEX readings_site_sample_taken ON readings (site_id, sample, taken_at);
