-- grain: one row per item_id that has a review note: its latest note (the item's current status)
create or replace view latest_review_note as
select item_id, status, note_text, noted_by, noted_at,
       count(*) over (partition by item_id) as n_notes
from review_note
qualify row_number() over (partition by item_id order by noted_at desc, note_id desc) = 1;

-- columns:
--   item_id: the finding
--   status: its current status: open, explained, action or closed
--   note_text: text of the latest note
--   noted_by: who wrote it
--   noted_at: when (UTC)
--   n_notes: notes on the item so far
