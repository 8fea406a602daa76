-- grain: one row per adult audit group whose room's change point (drift_flags) falls inside the
-- period: sets change_month and the median of the group's values from that month on
update audit_medians as a
set change_month = x.change_month, median_after_change = x.median_after
from (
    select d.device_key, d.exam_type, d.quantity, d.change_month, o.phantom,
           quantile_cont(o.value, 0.5) as median_after
    from drift_flags as d
    join audit_input as o using (device_key, exam_type, quantity)
    where o.study_date >= $date_from and o.study_date < $date_to
      and o.patient_age_years >= $adult_min_age
      and o.period >= d.change_month
      and d.change_month between strftime($date_from, '%Y-%m')
                             and strftime($date_to - interval 1 day, '%Y-%m')
    group by all
) as x
where a.device_key = x.device_key and a.exam_type = x.exam_type and a.quantity = x.quantity
  and a.population = 'adult' and a.phantom is not distinct from x.phantom
