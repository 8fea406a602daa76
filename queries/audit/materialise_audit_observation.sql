-- grain: one row per audited value (audit_observation), computed once per audit run
-- A temporary table hiding the view for this connection (see materialise_study_dose.sql).
create temp table audit_observation as select * from audit_observation
