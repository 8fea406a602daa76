-- grain: one row per dose object of a site's devices whose study falls in the period ($site,
-- $date_from inclusive, $date_after exclusive); the rows a site extract carries
select o.*
from raw_dose_object as o
join device as d using (device_key)
left join raw_study as s using (study_key)
where d.site = $site
  and coalesce(o.study_date, s.study_date) >= $date_from
  and coalesce(o.study_date, s.study_date) < $date_after
order by o.sop_instance_uid
