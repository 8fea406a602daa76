-- grain: one row per phrase of an exam-type rule (pipeline/exam_rules.toml + kerma.toml); replaced on each run
create table if not exists raw_exam_rule (
    rule_id bigint,            -- precedence: lower wins within a field
    exam_type varchar,
    field varchar,             -- procedure_code | acquisition_protocol | study_description | series_description | body_part
    field_priority bigint,     -- 0 = tried first
    modality varchar,          -- NULL = any modality
    kind varchar,              -- any | none
    phrase varchar,            -- normalised: lower case, punctuation as single spaces
    source varchar
);
