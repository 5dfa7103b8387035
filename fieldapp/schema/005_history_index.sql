-- Schema version 5: the history check reads a site's latest readings of one
-- kind; this index keeps that a short range scan however long the log grows.
CREATE INDEX readings_site_sample_taken ON readings (site_id, sample, taken_at);
