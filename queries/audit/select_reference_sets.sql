-- grain: one row per reference-level set in the warehouse, newest first. is_current: all its
-- values are verified and the set records no end of validity (valid_to); a superseded or
-- unverified set stays available by name. Which sets an audit uses: pipeline/jurisdiction.py
with sets as (
    select set_id, max(effective_date) as effective_date, bool_and(verified) as all_verified,
           bool_and(valid_to is null) as is_open
    from reference_level group by set_id
)
select set_id, all_verified and is_open as is_current
from sets
order by effective_date desc, set_id
