-- grain: one row per RF/XA study x device in the period: peak skin dose estimate (public interface)
-- psd_mgy: largest cell of the summed skin-dose map (pipeline/skin_dose.py, Jones & Pasciak
-- 2011 Part I method); is_upper_bound: some events lacked geometry and were added at their
-- reference-point value; factor_sources: every factor and its source; an estimate, see
-- uncertainty_note (typically within about +-40 %; clinical follow-up by the responsible physician)
create or replace table skin_dose as select * from incoming_skin_dose
