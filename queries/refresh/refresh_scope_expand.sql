-- refresh: add to the refresh scope every study sharing an irradiation event with a study in it
-- (the deduplication keeps one copy per event_uid across reports, whatever their study), and
-- every study sharing a SOP instance with one (a report relabelled to another study)
insert into refresh_scope
select distinct other.study_key
from (
    select e.event_uid, e.study_key from raw_projection_event as e
    union all
    select e.event_uid, e.study_key from raw_ct_event as e
) as mine
join (
    select event_uid, study_key from raw_projection_event
    union all
    select event_uid, study_key from raw_ct_event
) as other using (event_uid)
where mine.study_key in (select study_key from refresh_scope)
  and other.study_key not in (select study_key from refresh_scope)
  and other.study_key is not null
