-- Schema version 19 (PostgreSQL twin of ../019_view_indexes.sql): the site
-- views are a query over one site's readings (store.site_views.day_totals).
-- This index walks a site by sample kind and depth in time order and carries
-- every column that pass and a chart point read, so both are answered from
-- the index alone (an index-only scan).
CREATE INDEX readings_site_views ON readings (site_id, sample, depth_cm, taken_at)
    INCLUDE (ece_dS_m, ec25_dS_m, flags, uuid);
