-- Schema version 19: the site views (site page, visit report, summary API)
-- are a query over one site's readings: the count and the lowest, highest and
-- mean value of each sample kind, depth and day (store.site_views.day_totals),
-- then only the readings of the days the interpretation needs. This index
-- holds every column that pass reads, by sample kind and depth in time order, so
-- the pass never reads a reading's full row (with its result JSON); the
-- flagged readings a chart keeps are found through its `flags` column, and a
-- chart point (time, value, uuid, flags) is read from the index alone.
CREATE INDEX readings_site_views ON readings
    (site_id, sample, depth_cm, taken_at, ece_dS_m, ec25_dS_m, flags, uuid);
