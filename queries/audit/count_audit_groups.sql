-- grain: one value: number of audit groups
select count(*) from audit_medians
