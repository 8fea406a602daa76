-- grain: one row per reference-level set in the warehouse, with what choosing a jurisdiction needs
select set_id, any_value(origin) as origin, any_value(issuing_body) as issuing_body,
       any_value(country) as country, max(effective_date) as effective_date,
       any_value(valid_to) as valid_to, any_value(superseded_by) as superseded_by,
       bool_and(verified) as all_verified
from reference_level group by set_id order by set_id
