-- grain: one value: the largest number of observations of one audit group in the period
select max(n) from (
    select count(*) as n from audit_observation
    where study_date >= $date_from and study_date < $date_to
    group by site, device_key, exam_type, quantity, phantom
)
