-- refresh: forget the previous state (one row is kept)
delete from derived_state
