-- grain: one row per value-level issue for studies in the period (or whose study is not dated)
with
studies as (
    -- only the studies with an issue (a few): grouping every study of study_dose cost 2.1-2.5
    -- of 2.5 CPU-s at 10M events (measured, no other source)
    select study_key, any_value(study_date) as study_date, any_value(device_key) as device_key
    from derived_study_total   -- study_dose's rows: its date and device are the kept totals'
    where study_key in (select study_key from value_issue)
    group by study_key
)
select
    s.study_date,
    i.study_key,
    coalesce(d.site_label, '(site not known)') as site_label,
    coalesce(d.room_label, coalesce(i.device_key, s.device_key), '(unknown)') as room_label,
    i.kind,
    i.concept_code,
    coalesce(c.meaning, i.concept_code) as concept,
    i.raw_value,
    i.raw_unit,
    i.detail
from value_issue as i
left join studies as s on s.study_key = i.study_key
left join dash_device as d on d.device_key = coalesce(i.device_key, s.device_key)
left join dash_concept as c on c.concept_code = i.concept_code
where s.study_date is null or (s.study_date >= $date_from and s.study_date < $date_to)
order by s.study_date nulls last, i.kind, i.concept_code, i.study_key, i.issue_id
