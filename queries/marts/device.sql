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

-- columns:
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   modality: irradiating modality: CT, DX, CR, RF, XA or MG
--   manufacturer: Manufacturer as the dose report names it
--   model: Manufacturer's Model Name
--   serial_number: Device Serial Number
--   station_name: Station Name (0008,1010)
--   device_observer_uid: Device Observer UID of the dose report (TID 1004)
--   institution_name: Institution Name (0008,0080) as the device reports it
--   department_name: Institutional Department Name (0008,1040)
--   physical_location: Device Observer Physical Location During Observation
--   software_versions: Software Versions (0018,1020)
