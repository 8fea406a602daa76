-- grain: one row: a digest of the exam rules in force (raw_exam_rule), which derived_exam_match
-- depends on
select count(*) || ':' || coalesce(sum(hash(rule_id, exam_type, field, field_priority, modality,
                                            kind, phrase)), 0) as rules
from raw_exam_rule
