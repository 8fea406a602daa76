-- grain: one row per audited adult observation (age known) up to the period end: the input of the change-point test
-- Ranked within its series (device x site x exam type x quantity x unit): rank2 is twice the
-- observation's average rank over the whole series (ties share the mean of their ranks, as
-- scipy.stats.rankdata 'average'), an integer, so rank sums are exact.
create or replace temp table drift_observation as
with
obs as (
    select device_key, site, exam_type, quantity, unit, period, value
    from audit_observation
    where study_date < $date_to
      and patient_age_years >= $adult_min_age  -- unknown age is not adult
      and (quantity <> 'ctdivol' or phantom is not null)
)
select *,
       2 * rank() over (partition by device_key, site, exam_type, quantity, unit order by value)
         + count(*) over (partition by device_key, site, exam_type, quantity, unit, value) - 1
           as rank2
from obs
