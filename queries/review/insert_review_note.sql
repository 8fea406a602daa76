-- grain: one new review note (append-only; never updated or deleted)
insert into review_note (note_id, item_id, status, note_text, noted_by, noted_at)
values ($note_id, $item_id, $status, $note_text, $noted_by, $noted_at);
