-- grain: one row per study x device that an indication rule marks: the clinical indication its
-- texts name (procedure code, protocol, study or series description), first rule wins
create or replace temp table study_indication as
with
texts as (
    select t.study_key, t.device_key, t.text_norm, s.exam_type
    from study_dose as s
    join stg_exam_text as t
      on t.unit_kind = 'study' and t.study_key = s.study_key and t.device_key = s.device_key
    where s.exam_type in (select exam_type from indication_rule)
),
hits as (
    -- texts repeat across studies: each distinct text is matched against the rules once
    select d.exam_type, d.text_norm, r.rule_id, r.indication
    from (select distinct exam_type, text_norm from texts) as d
    join indication_rule as r
      on r.exam_type = d.exam_type
     and position(' ' || r.phrase || ' ' in ' ' || d.text_norm || ' ') > 0
)
select t.study_key, t.device_key, h.indication
from texts as t
join hits as h using (exam_type, text_norm)
qualify row_number() over (partition by t.study_key, t.device_key order by h.rule_id) = 1
