-- grain: one row per reference value of a reference-level set (shipped, imported or derived)
create table if not exists reference_level (
    set_id varchar,
    origin varchar,            -- shipped | imported | derived
    issuing_body varchar,
    country varchar,           -- ISO 3166-1 alpha-2 of the issuing body
    version varchar,
    effective_date varchar,    -- valid from; as precise as the source gives it: YYYY, YYYY-MM or YYYY-MM-DD
    valid_to varchar,          -- last day in force (NULL: in force), same precision rules
    superseded_by varchar,     -- the set or edition that replaced it
    exam_type varchar,
    indication varchar,        -- clinical indication the value is defined for (NULL: anatomy only)
    quantity varchar,          -- dlp | ctdivol | dap | dose_rp | fluoro_time | agd | ka_e
    value double,              -- as published
    unit varchar,              -- as published
    value_canonical double,    -- in the audit unit of the quantity
    unit_canonical varchar,
    population varchar,        -- adult | paediatric
    age_min_years double,
    age_max_years double,
    weight_min_kg double,
    weight_max_kg double,
    phantom varchar,           -- head_16cm | body_32cm for CTDIvol
    phantom_stated boolean,    -- the source itself states the phantom (false: recalled convention)
    citation_title varchar,
    citation_year bigint,
    citation_table varchar,
    citation_url varchar,
    verified boolean,
    note varchar
);
