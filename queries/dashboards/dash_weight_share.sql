-- grain: one row per site x modality in the period: how many studies record patient weight,
-- height and age (SSDE, standard-size medians and paediatric grouping depend on them)
with
period_rows as (
    -- the period's studies (dash_period_study, made by dash_period_studies.sql) with their
    -- devices' sites: study_dose's site is the view device's, the one dash_device labels, so a
    -- device of the view always has a site label and any other device has no site
    select coalesce(d.site_label, '(site not known)') as site_label, p.*
    from dash_period_study as p
    left join dash_device as d on d.device_key = p.device_key
),
per_study as (
    -- one row per study x site x modality (a count of such studies for the studies of one row:
    -- dash_period_study counts them per device, modality and flags), then
    -- plain counts, not four distinct counts of the study keys
    select site_label, modality, n_studies, has_weight, has_height, has_age
    from period_rows
    where not is_study_row
    union all
    select site_label, modality, 1, bool_or(has_weight), bool_or(has_height), bool_or(has_age)
    from period_rows
    where is_study_row
    group by site_label, modality, study_key
),
counts as (
    select
        site_label,
        modality,
        sum(n_studies)::bigint as n_studies,
        coalesce(sum(n_studies) filter (where has_weight), 0)::bigint as n_with_weight,
        coalesce(sum(n_studies) filter (where has_height), 0)::bigint as n_with_height,
        coalesce(sum(n_studies) filter (where has_age), 0)::bigint as n_with_age
    from per_study
    group by site_label, modality
)
select
    site_label,
    modality,
    n_studies,
    n_with_weight,
    n_with_height,
    n_with_age,
    100.0 * n_with_weight / n_studies as pct_with_weight
from counts
order by site_label, modality
