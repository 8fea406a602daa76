-- grain: one row per item_id with a review note: the latest note (view latest_review_note)
select item_id, status, note_text, noted_by, noted_at, n_notes from latest_review_note
