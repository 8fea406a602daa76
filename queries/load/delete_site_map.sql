-- load: forget the previous device -> site assignments (replaced from kerma.toml on each run)
delete from raw_site_map
