-- grain: one row per exam type x quantity x population x age/weight band (x phantom, stated or not): the value
-- of the first chosen set (primary sets first, then configured fallback sets) that has one; a
-- CTDIvol row whose source states its phantom is kept apart from one whose phantom is recalled,
-- so that a stated one further down the order can still be compared (audit_medians prefers it)
create or replace temp table reference_in_force as
select r.*, c.precedence, c.is_fallback
from reference_level as r
join chosen_reference_set as c using (set_id)
where r.value_canonical is not null
qualify row_number() over (
    partition by r.exam_type, r.quantity, r.population,
                 coalesce(r.age_min_years, -1), coalesce(r.age_max_years, -1),
                 coalesce(r.weight_min_kg, -1), coalesce(r.weight_max_kg, -1),
                 coalesce(r.phantom, ''), coalesce(r.phantom_stated, false)
    order by c.precedence) = 1
