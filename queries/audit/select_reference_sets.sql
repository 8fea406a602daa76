-- grain: one row per reference-level set in the warehouse, newest first. used_by_default: all its
-- values are verified and no newer all-verified set of the same issuing body covers the same
-- exam types (a superseded edition stays available by name)
with sets as (
    select set_id, any_value(issuing_body) as issuing_body, max(effective_date) as effective_date,
           bool_and(verified) as all_verified, any_value(origin) as origin
    from reference_level group by set_id
)
select set_id,
       all_verified and not exists (
           select 1 from sets as newer
           where newer.issuing_body = s.issuing_body and newer.all_verified
             and newer.effective_date > s.effective_date and s.origin = 'shipped'
       ) as used_by_default
from sets as s
order by effective_date desc, set_id
