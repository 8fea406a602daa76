-- grain: one row per value-level issue (the value itself is stored as NULL, never guessed)
-- key (issue_id): kept by the load, not by a primary key. A report's rows arrive
-- only with the report, which is loaded once (a SOP Instance UID already in raw_dose_object is a
-- duplicate), and each batch keeps the first row of each key (pipeline/warehouse/load.py, GRAIN).
-- An index on these random UIDs was read nearly whole by every batch's insert, so it stayed in
-- memory and grew with the warehouse (bench/ingest_scale.py). A warehouse created with the
-- primary key keeps it (and its memory); its loads work the same
create table if not exists raw_value_issue (
    issue_id varchar,
    sop_instance_uid varchar,
    event_uid varchar,
    kind varchar,
    concept_code varchar,      -- scheme:value of the concept, e.g. DCM:113838
    detail varchar,
    raw_value varchar,
    raw_unit varchar,
    run_id varchar
);
