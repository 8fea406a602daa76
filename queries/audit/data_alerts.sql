-- grain: one row per (period, device_key, kind) whose feed of dose objects looks broken; public interface
-- kind: 'silent' (no study for >= $silent_days days at the end of the period), 'volume_drop'
-- (studies per week in the period below $volume_drop x the device's median weekly count over the
-- previous months, $history_from to $date_from), 'no_data' (a device with history sent nothing in
-- the period; device_key NULL: the whole warehouse holds no study in the period).
-- Weekly history: 7-day bins ending at $date_from, from the device's first study in the window
-- (weeks without a study count as 0); volume_drop needs >= $min_history_weeks such weeks.
-- item_id: stable across reruns (hash of period, device and kind) so review notes can attach.
-- action: always 'data_check', the tier reviewed before the dose findings.
create or replace table data_alerts as
with
studies as (
    select distinct device_key, study_key, study_date
    from study_dose
    where study_date < $date_to and device_key is not null and study_date is not null
),
period_counts as (
    select device_key, count(distinct study_key) as n_period
    from studies where study_date >= $date_from
    group by device_key
),
history_bins as (
    select device_key,
           cast(floor(datediff('day', study_date, cast($date_from as date) - 1) / 7) as bigint) as week_back,
           count(distinct study_key) as n_studies
    from studies
    where study_date >= $history_from and study_date < $date_from
    group by all
),
active as (
    -- every device with a study in the history window or the period
    select device_key,
           max(study_date) as last_study_date
    from studies
    where study_date >= $history_from
    group by device_key
),
history_span as (
    select device_key, max(week_back) + 1 as n_weeks from history_bins group by device_key
),
history_weeks as (
    select s.device_key, w.week_back, coalesce(b.n_studies, 0) as n_studies
    from history_span as s
    cross join lateral (select unnest(range(s.n_weeks)) as week_back) as w
    left join history_bins as b on b.device_key = s.device_key and b.week_back = w.week_back
),
expected as (
    select device_key, count(*) as n_history_weeks, median(n_studies) as expected_per_week
    from history_weeks group by device_key
),
per_device as (
    select
        a.device_key,
        d.site,
        -- last study up to the period end, from all history, not only the window
        (select max(s.study_date) from studies as s where s.device_key = a.device_key) as last_study_date,
        coalesce(p.n_period, 0) as n_period,
        coalesce(e.n_history_weeks, 0) as n_history_weeks,
        cast(e.expected_per_week as double) as expected_per_week,
        coalesce(p.n_period, 0) * 7.0 / datediff('day', cast($date_from as date), cast($date_to as date))
            as observed_per_week,
        datediff('day', (select max(s.study_date) from studies as s where s.device_key = a.device_key),
                 cast($date_to as date) - 1) as days_silent
    from active as a
    left join device as d on d.device_key = a.device_key
    left join period_counts as p on p.device_key = a.device_key
    left join expected as e on e.device_key = a.device_key
),
found as (
    select device_key, site, 'no_data' as kind, last_study_date, expected_per_week, observed_per_week,
           'no study from this device in the period; last study on ' || cast(last_study_date as varchar)
           || coalesce(', median ' || cast(round(expected_per_week, 1) as varchar)
                       || ' studies per week over the previous months', '') as detail
    from per_device where n_period = 0
    union all
    select device_key, site, 'silent', last_study_date, expected_per_week, observed_per_week,
           'no study for the last ' || cast(days_silent as varchar) || ' days of the period (last on '
           || cast(last_study_date as varchar) || '; threshold ' || cast($silent_days as varchar) || ' days)'
    from per_device where n_period > 0 and days_silent >= $silent_days
    union all
    select device_key, site, 'volume_drop', last_study_date, expected_per_week, observed_per_week,
           cast(round(observed_per_week, 1) as varchar) || ' studies per week in the period against a median of '
           || cast(round(expected_per_week, 1) as varchar) || ' over the previous '
           || cast(n_history_weeks as varchar) || ' weeks (threshold '
           || cast(cast(round(100 * $volume_drop) as integer) as varchar) || ' %)'
    from per_device
    where n_period > 0 and n_history_weeks >= $min_history_weeks and expected_per_week > 0
      and observed_per_week < $volume_drop * expected_per_week
    union all
    select null, null, 'no_data', (select max(study_date) from studies), null, 0.0,
           'no data for this period: the warehouse holds no study dated in it'
           || coalesce(' (last study on ' || cast((select max(study_date) from studies) as varchar) || ')', '')
    where not exists (select 1 from studies where study_date >= $date_from)
)
select
    cast($period as varchar) as period,
    device_key,
    site,
    kind,
    last_study_date,
    expected_per_week,
    observed_per_week,
    detail,
    substr(sha256(cast($period as varchar) || '|' || coalesce(device_key, '(network)') || '|' || kind), 1, 16)
        as item_id,
    'data_check' as action   -- the alert tier, as dose_alerts.action: reviewed before dose findings
from found
order by device_key nulls first, kind

-- columns:
--   period: the audited period: YYYY-MM, or first..last day
--   device_key: the device whose feed looks broken (NULL: the whole warehouse)
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   kind: silent, volume_drop or no_data
--   last_study_date: date of the device's last study up to the period end
--   expected_per_week: median studies per week over the previous months [studies per week]
--   observed_per_week: studies per week in the period [studies per week]
--   detail: the finding in words
--   item_id: stable finding id: the same finding next period has the same id (notes attach to it:
--     kerma note)
--   action: always data_check: the tier reviewed before the dose findings
