-- grain: one row: audit groups, those compared with a reference level, those below their minimum sample
select count(*), count(reference_value), count(*) filter (where not is_sample_adequate)
from audit_medians
