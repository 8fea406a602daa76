-- grain: one row per CT study x device in the period: CTDIvol accumulated at a table position (NEMA XR 25) and how
create or replace temp table ct_accumulated as select * from incoming_ct_accumulated
