-- grain: one row per device x exam type x quantity whose monthly series shows a change point
create or replace table drift_flags as select * from incoming_drift_flags
