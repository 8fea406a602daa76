-- grain: one row per chosen series x side (before / after its change month): the median of the side's values
-- The median as numpy.median takes it: the middle value, or the mean of the two middle ones
-- (quantile_cont at 0.5). Series and change months come from table drift_choice.
select s.device_key, s.site, s.exam_type, s.quantity, s.unit, o.period >= c.change_month as is_after,
       quantile_cont(o.value, 0.5) as median
from drift_choice as c
join drift_series as s
  on c.device_key is not distinct from s.device_key and c.site is not distinct from s.site
 and c.exam_type is not distinct from s.exam_type and c.quantity is not distinct from s.quantity
 and c.unit is not distinct from s.unit
join drift_observation as o using (series_id)
group by all
