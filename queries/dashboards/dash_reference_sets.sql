-- grain: one row per reference-level set whose values the audit compared medians with
with
used as (
    select reference_set as set_id, count(*) as n_groups
    from audit_medians
    where reference_set is not null
    group by reference_set
)
select
    u.set_id,
    any_value(r.origin) as origin,
    any_value(r.issuing_body) as issuing_body,
    any_value(r.version) as version,
    any_value(r.effective_date) as effective_date,
    any_value(r.citation_title) as citation_title,
    any_value(r.citation_year) as citation_year,
    bool_and(r.verified) as is_verified,
    any_value(u.n_groups) as n_groups
from used as u
left join reference_level as r on r.set_id = u.set_id
group by u.set_id
order by u.set_id
