-- grain: one row: the studies in the warehouse
select count(*) as n_studies from raw_study
