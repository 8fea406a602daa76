-- grain: one row per modality: minimum exams in an audit group before its median is compared
create or replace temp table min_sample_rule as select * from incoming_min_sample_rule
