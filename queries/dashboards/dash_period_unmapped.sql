-- grain: one row per row of study_dose in the period with no exam type (no exam rule maps the
-- study): its study, device, modality and study description. A temporary table read by the
-- overview's count of unmapped studies and the unmapped descriptions (dash_unmapped.sql),
-- dropped by dash_drop_materialised.sql. Read from the kept totals and exam matches behind
-- study_dose (derived_study_total, and the study unit's match in stg_exam_match, which holds
-- one row per study unit, so the view's exam type is NULL exactly where no match of the study
-- and device carries one). An anti join on the matches' keys: the view's left join built its
-- hash table on the totals with their descriptions and spilled (10M events, 256 MB: 1.5-1.7
-- CPU-s; this at dashboards.site.FILES_MEMORY_LIMIT 1.1; measured, no other source).
create temp table dash_period_unmapped as
select t.study_key, t.device_key, t.modality, t.study_description
from derived_study_total as t
anti join (
    select study_key, device_key
    from stg_exam_match
    where unit_kind = 'study' and exam_type is not null
) as x on x.study_key = t.study_key and x.device_key = t.device_key
where t.study_date >= $date_from and t.study_date < $date_to
