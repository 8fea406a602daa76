-- grain: one row per study x device that an indication rule marks: the clinical indication its
-- texts name (procedure code, protocol, study or series description), first rule wins
create or replace temp table study_indication as
select s.study_key, s.device_key, r.indication
from study_dose as s
join stg_exam_text as t
  on t.unit_kind = 'study' and t.study_key = s.study_key and t.device_key = s.device_key
join indication_rule as r
  on r.exam_type = s.exam_type
 and position(' ' || r.phrase || ' ' in ' ' || t.text_norm || ' ') > 0
qualify row_number() over (partition by s.study_key, s.device_key order by r.rule_id) = 1
