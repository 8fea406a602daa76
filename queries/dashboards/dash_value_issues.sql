-- grain: one row per value-level issue kind x concept for studies in the period (or whose
-- study is not dated): number of issues and of studies affected
with
studies as (
    -- only the studies with an issue (a few), not every study of study_dose
    select study_key, any_value(study_date) as study_date
    from derived_study_total   -- study_dose's rows: its date and device are the kept totals'
    where study_key in (select study_key from value_issue)
    group by study_key
)
select
    i.kind,
    i.concept_code,
    coalesce(c.meaning, i.concept_code) as concept,
    count(*) as n_issues,
    count(distinct i.study_key) as n_studies
from value_issue as i
left join studies as s on s.study_key = i.study_key
left join dash_concept as c on c.concept_code = i.concept_code
where s.study_date is null or (s.study_date >= $date_from and s.study_date < $date_to)
group by all
order by n_issues desc, i.kind, i.concept_code
