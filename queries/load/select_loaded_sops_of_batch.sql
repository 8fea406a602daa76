-- load: the SOP Instance UIDs of the batch (incoming_sops) already loaded
select d.sop_instance_uid
from raw_dose_object as d
where d.sop_instance_uid in (select sop_instance_uid from incoming_sops)
