-- grain: one row per chosen series x side (before / after its change month): the median of the side's values
-- The median as numpy.median takes it: the middle value, or the mean (a + b) / 2 of the two
-- middle ones. Series and change months come from table drift_choice.
with
sides as (
    select o.device_key, o.site, o.exam_type, o.quantity, o.unit, o.value,
           o.period >= c.change_month as is_after
    from drift_observation as o
    join drift_choice as c
      on c.device_key is not distinct from o.device_key and c.site is not distinct from o.site
     and c.exam_type is not distinct from o.exam_type and c.quantity is not distinct from o.quantity
     and c.unit is not distinct from o.unit
),
ordered as (
    select *,
           row_number() over w as position,
           count(*) over (partition by device_key, site, exam_type, quantity, unit, is_after) as n
    from sides
    window w as (partition by device_key, site, exam_type, quantity, unit, is_after order by value)
)
select device_key, site, exam_type, quantity, unit, is_after, (min(value) + max(value)) / 2 as median
from ordered
where position in ((n + 1) // 2, n // 2 + 1)
group by device_key, site, exam_type, quantity, unit, is_after
