-- grain: one row per stratum band (basis age | weight | thickness): [low, high) with its source
create or replace temp table stratum_band as select * from incoming_stratum_band
