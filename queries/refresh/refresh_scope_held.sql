-- refresh: whether {table} holds any row of the studies in refresh_scope. Asked of each derived
-- table before the refresh's transaction begins, so that its scan's blocks can be let go before
-- the transaction (pipeline/warehouse/derived.py); in it, only the tables that hold some are
-- deleted from (an ingest of new studies deletes nothing)
select exists (select 1 from {table} where study_key in (select study_key from refresh_scope))
