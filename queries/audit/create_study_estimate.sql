-- grain: one row per CT study x device: SSDE and the population-average effective-dose estimate
create or replace table study_estimate as select * from incoming_study_estimate
