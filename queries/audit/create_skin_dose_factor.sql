-- grain: one row per RF/XA study x device x factor of its peak skin dose estimate (public interface)
-- factor: inverse_square, backscatter, f_tissue_air, table_transmission; value_min / value_max
-- over the events' central rays (pipeline/skin_dose.py); source: the publication and table the
-- factor comes from, or "from memory" where it was not read (queries/seeds/skin_dose_factors.md)
create or replace table skin_dose_factor as select * from incoming_skin_dose_factor
