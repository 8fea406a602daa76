-- grain: one row per standard exam type: whose band (age | weight | thickness) stratifies it, and its body region
create or replace temp table exam_stratum_basis as select * from incoming_exam_stratum_basis
