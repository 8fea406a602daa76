-- grain: one row: key epochs recorded by `kerma ingest` (a network warehouse has none)
select count(*) as n_key_epochs from raw_key_epoch
