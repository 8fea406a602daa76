-- grain: one row per review note, oldest first (all items, or one item when $item_id is given)
select note_id, item_id, status, noted_at, noted_by, note_text
from review_note
where $item_id is null or item_id = $item_id
order by noted_at, note_id;
