-- grain: one row: the state of the raw tables and the definitions the derived_* tables were last
-- refreshed from (pipeline/warehouse/derived.py); a mismatch makes the next refresh rebuild them
create table if not exists derived_state (
    raw_state varchar,
    definitions varchar,
    rules varchar,     -- digest of raw_exam_rule that derived_exam_match was computed with
    refreshed_at timestamp,
    n_studies_refreshed bigint,
    mode varchar   -- 'incremental' (the studies a run touched) or 'full'
)
