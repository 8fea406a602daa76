-- grain: one row per exam type x quantity x population x phantom: the value of the first chosen
-- set (in the order the user listed them) that has one
create or replace temp table reference_in_force as
select r.*, c.precedence
from reference_level as r
join chosen_reference_set as c using (set_id)
where r.value_canonical is not null
qualify row_number() over (
    partition by r.exam_type, r.quantity, r.population, coalesce(r.phantom, '')
    order by c.precedence) = 1
