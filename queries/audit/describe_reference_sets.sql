-- grain: one row per reference-level set in the warehouse
select set_id, any_value(origin) as origin, any_value(issuing_body) as issuing_body,
       any_value(country) as country, any_value(effective_date) as effective_date,
       any_value(valid_to) as valid_to, any_value(superseded_by) as superseded_by,
       count(*) as n_values, bool_and(verified) as all_verified,
       string_agg(distinct exam_type, ', ' order by exam_type) as exam_types
from reference_level group by set_id order by set_id
