-- grain: one row per irradiating device; public interface
-- site: from kerma.toml [sites] (matched on Device Observer UID, device key or Station Name),
-- else the Institution Name the device reports.
create or replace view device as
select
    d.device_key,
    coalesce(
        (select s.site from raw_site_map as s where s.match_value = d.device_observer_uid),
        (select s.site from raw_site_map as s where s.match_value = d.device_key),
        (select s.site from raw_site_map as s where s.match_value = d.station_name),
        d.institution_name) as site,
    d.modality,
    d.manufacturer,
    d.model,
    d.serial_number,
    d.station_name,
    d.device_observer_uid,
    d.institution_name,
    d.department_name,
    d.physical_location,
    d.software_versions
from raw_device as d
