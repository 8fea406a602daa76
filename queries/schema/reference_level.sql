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

-- columns:
--   set_id: id of the reference-level set
--   origin: shipped, imported or derived
--   issuing_body: body that published the set
--   country: ISO 3166-1 alpha-2 country of the issuing body
--   version: edition of the set
--   effective_date: valid from: YYYY, YYYY-MM or YYYY-MM-DD, as precise as the source
--   valid_to: last day in force (NULL: in force), same precision rules
--   superseded_by: the set or edition that replaced it
--   exam_type: standard exam type the value applies to
--   indication: clinical indication the value is defined for (NULL: anatomy only)
--   quantity: dlp, ctdivol, dap, dose_rp, fluoro_time, agd or ka_e
--   value: the reference value as published [unit column]
--   unit: unit as published
--   value_canonical: the value in the audit unit of the quantity [unit_canonical column]
--   unit_canonical: the audit unit: mGy, mGy.cm, Gy.cm2 or s
--   population: adult or paediatric
--   age_min_years: lower age bound of a paediatric band (inclusive)
--   age_max_years: upper age bound of a paediatric band (exclusive; NULL: open)
--   weight_min_kg: lower weight bound of a paediatric band (inclusive)
--   weight_max_kg: upper weight bound of a paediatric band (exclusive; NULL: open)
--   phantom: head_16cm or body_32cm for CTDIvol
--   phantom_stated: the source itself states the phantom (false: a recalled convention)
--   citation_title: title of the source publication
--   citation_year: year of the source publication
--   citation_table: table of the source the value comes from
--   citation_url: where the source can be read
--   verified: the value was read in its source (false: from memory, labelled)
--   note: remarks on the value
