-- grain: one row per note a reviewer wrote on a finding (append-only: notes are never changed
-- or deleted; the latest note of an item is its current status)
create table if not exists review_note (
    note_id varchar primary key,
    item_id varchar not null,
    status varchar not null check (status in ('open', 'explained', 'action', 'closed')),
    note_text varchar not null,
    noted_by varchar not null,
    noted_at timestamp not null
);

-- columns:
--   note_id: id of the note
--   item_id: the finding the note is about
--   status: open, explained, action or closed
--   note_text: the reviewer's text
--   noted_by: staff name or role (never a patient's)
--   noted_at: when the note was written (UTC)
