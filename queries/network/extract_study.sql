-- grain: one row per study with a dose object in the extract (extract_dose_object registered)
select *
from raw_study
where study_key in (select study_key from extract_dose_object)
order by study_key
