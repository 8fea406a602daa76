-- grain: one row per RF/XA study x device x factor of its peak skin dose estimate (public interface)
-- factor: inverse_square, backscatter, f_tissue_air, table_transmission; value_min / value_max
-- over the events' central rays (pipeline/skin_dose.py); source: the publication and table the
-- factor comes from, or "from memory" where it was not read (queries/seeds/skin_dose_factors.md)
-- Not sorted, like skin_dose: the audit tables' row order is not part of their interface (read
-- them with ORDER BY); sorted by study it took 1.1 CPU-s at 10M events, unsorted 0.6 (measured,
-- no other source).
create or replace table skin_dose_factor as
select f.study_key, f.device_key, f.factor, f.n_events, f.value_min, f.value_max, f.source
from derived_skin_dose_factor as f
join skin_dose as s using (study_key, device_key)

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   factor: inverse_square, backscatter, f_tissue_air or table_transmission [1]
--   n_events: events of the study the factor was applied to
--   value_min: smallest value of the factor over those events' central rays [1]
--   value_max: largest value of the factor over those events' central rays [1]
--   source: the publication and table the factor comes from, or "from memory"
