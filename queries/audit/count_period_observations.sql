-- grain: one row: the audited observations up to the period end (the monthly history included),
-- which decides into how many parts of the rooms the grouping statements run (pipeline.audit)
select count(*) from audit_observation where study_date < $date_to
