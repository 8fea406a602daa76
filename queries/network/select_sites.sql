-- grain: one row per site the warehouse's devices belong to (device.site)
select distinct site from device where site is not null order by site
