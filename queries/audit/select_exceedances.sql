-- grain: one row per audit group whose median is above its reference level
select site, device_key, exam_type, quantity, unit, n, median, reference_value,
       ratio_to_reference, reference_set, is_sample_adequate, min_sample,
       n_with_weight, n_standard_size, median_standard_size, ratio_standard_size_to_reference,
       population, stratum, reference_scope_note
from audit_medians where is_above_reference
order by ratio_to_reference desc
