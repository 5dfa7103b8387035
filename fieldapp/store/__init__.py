"""The log's storage: schema, migrations, queries. The only package that speaks SQL.

One interface, two backends: a SQLite file (the default, no setup) or, for an
office, a PostgreSQL database (``store.connect("postgresql://...")``, see
``pg.py``). The SQL is written once where the dialects agree and per dialect
(``store.dialect(conn)``) in the handful of statements where they differ.

The SQLite database is one file in WAL mode with foreign keys on and
``synchronous=FULL``, so a save that was acknowledged survives a crash or a
dead battery. Every write runs in an explicit transaction. Readings are
append-only (triggers refuse UPDATE and DELETE); a correction is a new row
pointing at the one it replaces, a void is a row in ``voids``.
"""

# One interface for the rest of the program: every caller says ``store.name``;
# the modules below hold one concern each.
from .core import (COMPUTED_FIELDS, DB_NAME, INPUT_FIELDS, SITE_NAME_MAX, StoreError,
                   VIEW_COLUMNS, DatabaseError, IntegrityError, OperationalError, connect,
                   dialect, migrate, readings_insert_sql, schema_version, transaction,
                   utc_now, _migrations, _split_sql, _view_values_sql)  # noqa: F401
from .pg import is_url as is_database_url  # noqa: F401
from .sites import (SITE_EDITABLE, SITE_SETTINGS, change_site_settings, clean_site_name,
                    ensure_site, get_site, list_sites, open_flag_counts,
                    site_by_former_name, site_history, update_site)  # noqa: F401
from .readings import (HISTORY_WINDOW, ack_flag, acked_reading_ids, acks_for_readings,
                       existing_uuids, export_select, get_reading, history_values, insert_ack,
                       insert_reading, insert_readings_bulk, insert_void, iter_readings,
                       list_readings, reading_dict, readings_brief, replicate_values,
                       stored_salt_type, void_reading, _READING_SELECT)  # noqa: F401
from .meters import (get_meter, insert_calibration, insert_meter, last_calibration,
                     list_calibrations, list_meters)  # noqa: F401
from .views import (delete_target, get_visit, list_targets, readings_for_visit,
                    save_target, view_readings, visits_for_site)  # noqa: F401
from .site_views import (SiteCache, day_totals, flagged_rows, log_state, next_day,
                         picked_rows)  # noqa: F401
from .site_select import site_rows  # noqa: F401
from .pairing import (active_pairing_codes, add_pairing_failure, device_by_token,
                      device_reading_counts, devices_paired_with, insert_device,
                      insert_pairing_code, list_devices, note_reading_device,
                      pairing_failure_counts, revoke_devices, revoke_pairing_codes,
                      touch_device)  # noqa: F401
from .rescue import (SQLITE_HEADER, connect_readonly, inspect_log, integrity_problems,
                     log_summary, unwritable_reason, _restore_hint)  # noqa: F401
from .paging import (PAGE_DEFAULT, PAGE_MAX, PageError, decode_cursor, encode_cursor,
                     iter_reading_batches, iter_readings_keyset, page_limit, readings_page,
                     sites_page)  # noqa: F401
from .imports import (drop_import_job, finish_import_job, import_clashes, import_job,
                      plan_add, plan_depths, plan_first_bad_status, plan_first_bad_target,
                      plan_first_self_or_twice, plan_marks, plan_reset, plan_seen,
                      set_import_depths, stage_import_rows,
                      staging_transaction)  # noqa: F401
from .sync import (clean_person, follow_site, get_setting, list_follows, log_uuid,
                   note_reading_origin, set_setting, unfollow_site)  # noqa: F401
from .sync_devices import (count_office_devices_of_code, insert_office_device,
                           list_office_devices, office_device, office_device_by_token,
                           revoke_office_device, touch_office_device)  # noqa: F401
from .sync_send import is_empty, pull_site, push_batch  # noqa: F401
from .sync_apply import apply_pull, apply_push  # noqa: F401
from .sync_views import (log_fingerprint, people_and_devices, review_pairs, scout_activity,
                         site_readings_by, sites_across_devices)  # noqa: F401
